// The map page's arithmetic and URL handling: pure functions, no DOM, no map library.
// Kept apart so that they can be checked on their own (the tests call them in a browser
// and compare with the service's Python).

/** Radius of the Web Mercator sphere (EPSG:3857), metres. */
export const WEB_MERCATOR_RADIUS = 6378137;
/** Latitude where the Web Mercator square ends, degrees. */
export const MAX_LATITUDE = (Math.atan(Math.sinh(Math.PI)) * 180) / Math.PI;

/**
 * Resolve a tile URL template against the page's base URL, keeping `{z}`, `{x}`, `{y}` as
 * they are (URL parsing would percent-encode the braces).
 */
export function absoluteTemplate(template, baseHref) {
  const marks = [];
  const plain = template.replace(/\{[A-Za-z]+\}/g, (m) => {
    marks.push(m);
    return `__cell${marks.length - 1}__`;
  });
  let out = new URL(plain, baseHref).href;
  marks.forEach((m, i) => {
    out = out.replace(`__cell${i}__`, m);
  });
  return out;
}

/** Add query parameters to a URL or template; empty values are left out, given ones win. */
export function withQuery(url, params) {
  const [head, query = ""] = url.split("?");
  const search = new URLSearchParams(query);
  for (const [key, value] of Object.entries(params)) {
    if (value === null || value === undefined || value === "") search.delete(key);
    else search.set(key, String(value));
  }
  const text = search.toString().replace(/%2C/gi, ",").replace(/%3A/gi, ":").replace(/%2F/gi, "/");
  return text ? `${head}?${text}` : head;
}

/** The tile row (WebMercatorQuad, counted from the north) holding a latitude at zoom z. */
export function tileRow(lat, z) {
  const n = 2 ** z;
  const clamped = Math.max(-MAX_LATITUDE, Math.min(MAX_LATITUDE, lat));
  const phi = (clamped * Math.PI) / 180;
  const v = (1 - Math.log(Math.tan(phi) + 1 / Math.cos(phi)) / Math.PI) / 2;
  return Math.max(0, Math.min(n - 1, Math.floor(v * n)));
}

/** Ground size of a pixel, metres, at the centre of tile row y at zoom z. */
export function pixelSize(z, y, tileSize = 256) {
  const v = (y + 0.5) / 2 ** z;
  const lat = Math.atan(Math.sinh(Math.PI * (1 - 2 * v)));
  return (2 * Math.PI * WEB_MERCATOR_RADIUS * Math.cos(lat)) / (tileSize * 2 ** z);
}

/**
 * The grid level a tile shows by default: the level whose zones are nearest
 * `info.targetPixels` across, then the nearest of the cube's levels (coarser on a tie).
 * `info` is the `levels` member of the tile set description.
 */
export function defaultLevel(z, y, info) {
  const px = pixelSize(z, y, info.tileSize);
  const width0 = Math.sqrt((2 * zoneArea0(info)) / Math.sqrt(3));
  const ideal = Math.log2(width0 / (info.targetPixels * px));
  const wanted = Math.min(Math.max(roundHalfEven(ideal), 0), 24);
  let best = null;
  for (const level of info.levels) {
    const key = [Math.abs(level - wanted), level];
    if (best === null || key[0] < best[0] || (key[0] === best[0] && key[1] < best[1])) best = key;
  }
  return best[1];
}

// Python's round() rounds halves to even; the level rule must agree with it.
function roundHalfEven(x) {
  const r = Math.round(x);
  return Math.abs(x % 1) === 0.5 && r % 2 !== 0 ? r - 1 : r;
}

// The level-0 zone area, recovered from any level's width (widths halve per level).
function zoneArea0(info) {
  const level = info.levels[0];
  const width = info.zoneWidths[String(level)];
  return ((width * 2 ** level) ** 2 * Math.sqrt(3)) / 2;
}

/**
 * The tile zoom a map library uses for raster tiles of `tileSize` at map zoom `mapZoom`
 * (its zoom counts 512-pixel worlds and rounds to the nearest tile zoom).
 */
export function tileZoom(mapZoom, tileSize, minzoom, maxzoom) {
  const z = Math.round(mapZoom + Math.log2(512 / tileSize));
  return Math.max(minzoom, Math.min(maxzoom, z));
}

/** The level of the zone drawn under (lat) at map zoom `mapZoom`, from a tile description. */
export function levelAt(lat, mapZoom, doc) {
  const z = tileZoom(mapZoom, doc.tileSize || 256, doc.minzoom || 0, doc.maxzoom ?? 24);
  return defaultLevel(z, tileRow(lat, z), doc.levels);
}

/** A value for people: about four significant digits, with units. */
export function formatValue(value, units) {
  if (value === null || value === undefined || Number.isNaN(value)) return "no data";
  const abs = Math.abs(value);
  let text;
  if (abs !== 0 && (abs >= 1e5 || abs < 1e-3)) text = value.toExponential(3);
  else text = Number(value.toPrecision(4)).toString();
  return units ? `${text} ${units}` : text;
}

/** Round values inside [lo, hi]: steps of 1, 2, 2.5 or 5 times a power of ten. */
export function niceTicks(lo, hi, count = 4) {
  const span = hi - lo;
  if (!(span > 0) || !Number.isFinite(span)) return [lo];
  const raw = span / count;
  const power = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 2.5, 5, 10].map((m) => m * power).find((s) => s >= raw);
  const out = [];
  for (let k = Math.ceil(lo / step - 1e-9); k <= Math.floor(hi / step + 1e-9); k++) {
    out.push(Number((k * step).toPrecision(12)));
  }
  return out;
}

/** The index of the time step shown, from a datetime text and the axis (latest at or before). */
export function stepIndex(times, datetime) {
  if (!times.length) return -1;
  if (!datetime) return times.length - 1;
  const t = Date.parse(datetime);
  let found = 0;
  times.forEach((value, i) => {
    if (Date.parse(value) <= t) found = i;
  });
  return found;
}

/** A GeoJSON graticule: meridians and parallels every `step` degrees. */
export function graticule(step = 10) {
  const lines = [];
  for (let lon = -180; lon <= 180; lon += step) {
    const line = [];
    for (let lat = -80; lat <= 80; lat += 2) line.push([lon, lat]);
    lines.push(line);
  }
  for (let lat = -80; lat <= 80; lat += step) {
    const line = [];
    for (let lon = -180; lon <= 180; lon += 2) line.push([lon, lat]);
    lines.push(line);
  }
  return {
    type: "FeatureCollection",
    features: [{ type: "Feature", properties: {}, geometry: { type: "MultiLineString", coordinates: lines } }],
  };
}

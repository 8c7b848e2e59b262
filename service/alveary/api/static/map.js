// The map page: pick a cube, a variable, a time step and a colour scale; see the cube's
// tiles over coastlines and a graticule; click a zone for its id, value and time series.
// Everything it needs comes from the service it was served by: no other host is asked.

import { drawSeries } from "./chart.js";
import * as logic from "./maplogic.js";

const maplibregl = window.maplibregl;
const base = new URL(".", document.baseURI).href; // the service root, behind any prefix
const api = (path, params = {}) => logic.withQuery(new URL(path, base).href, params);
const $ = (id) => document.getElementById(id);

// What a zone shows: its stored value, or a neighbourhood statistic (the service's focal
// parameters), the same for the tiles, the legend and the clicked zone's values.
const ANALYSES = {
  values: { label: "stored values", params: {} },
  mean1: { label: "mean with 1 ring of neighbours", params: { focal: "mean", focal_k: 1 } },
  mean2: { label: "mean with 2 rings of neighbours", params: { focal: "mean", focal_k: 2 } },
  std1: { label: "spread (std) over 1 ring", params: { focal: "std", focal_k: 1 } },
};

const state = {
  analysis: "values",
  cubes: [],
  cube: null, // the /cubes/{cube} answer
  doc: null, // the /collections/{cube}/map/tiles answer
  variable: null,
  step: -1,
  colormap: null,
  map: null,
  clicked: null,
};

async function getJSON(url) {
  const response = await fetch(url, { headers: { Accept: "application/json" } });
  const body = await response.json().catch(() => ({}));
  if (!response.ok) throw new Error(body.detail || body.title || `${response.status} from ${url}`);
  return body;
}

function status(text, isError = false) {
  const node = $("status");
  node.textContent = text || "";
  node.classList.toggle("error", isError);
}

function option(value, label) {
  const node = document.createElement("option");
  node.value = value;
  node.textContent = label;
  return node;
}

function times() {
  return (state.cube && state.cube.time && state.cube.time.values) || [];
}

function variableInfo() {
  return (state.cube && state.cube.variables[state.variable]) || { units: "", long_name: "" };
}

function analysisParams() {
  return ANALYSES[state.analysis].params;
}

function tileParams() {
  const t = times();
  return {
    vars: state.variable,
    datetime: state.step >= 0 ? t[state.step] : null,
    colormap: state.colormap,
    ...analysisParams(),
  };
}

function tileTemplate() {
  const template = logic.absoluteTemplate(state.doc.tiles[0], base);
  return logic.withQuery(template, tileParams());
}

function legendUrl() {
  return api(`collections/${encodeURIComponent(state.cube.id)}/legend`, {
    vars: state.variable,
    colormap: state.colormap,
    ...analysisParams(),
    f: "svg",
  });
}

function rememberChoices() {
  const url = new URL(window.location.href);
  const p = tileParams();
  url.searchParams.set("cube", state.cube.id);
  for (const k of ["focal", "focal_k"]) url.searchParams.delete(k);
  url.searchParams.set("show", state.analysis);
  for (const [k, v] of Object.entries(p)) if (v) url.searchParams.set(k, v);
  window.history.replaceState(null, "", url.toString());
}

function markLoading() {
  document.body.dataset.tiles = "loading";
}

function refreshTiles() {
  markLoading();
  const source = state.map.getSource("cube");
  if (source) source.setTiles([tileTemplate()]);
  const info = variableInfo();
  $("legend").src = legendUrl();
  const shown = state.analysis === "values" ? "" : `, ${ANALYSES[state.analysis].label}`;
  $("legend").alt = `legend: ${info.long_name || state.variable}${shown}${info.units ? ` (${info.units})` : ""}`;
  $("step-label").textContent = times()[state.step] || "";
  rememberChoices();
  if (state.clicked) inspect(state.clicked);
}

function fillPickers(query) {
  const vars = Object.keys(state.cube.variables);
  const vsel = $("variable");
  vsel.replaceChildren(
    ...vars.map((v) => option(v, state.cube.variables[v].long_name ? `${state.cube.variables[v].long_name} (${v})` : v)),
  );
  state.variable = vars.includes(query.get("vars")) ? query.get("vars") : vars[0];
  vsel.value = state.variable;

  const t = times();
  const slider = $("step");
  slider.min = 0;
  slider.max = Math.max(t.length - 1, 0);
  state.step = logic.stepIndex(t, query.get("datetime"));
  slider.value = state.step;
  slider.disabled = t.length < 2;

  const asel = $("analysis");
  asel.replaceChildren(...Object.entries(ANALYSES).map(([id, a]) => option(id, a.label)));
  state.analysis = query.get("show") in ANALYSES ? query.get("show") : "values";
  asel.value = state.analysis;

  const csel = $("colormap");
  const maps = state.doc.colormaps || {};
  csel.replaceChildren(...Object.keys(maps).map((name) => option(name, name)));
  for (const node of csel.options) node.title = maps[node.value].description;
  state.colormap = query.get("colormap") in maps ? query.get("colormap") : state.doc.defaultColormap;
  csel.value = state.colormap;
}

function style() {
  const sources = {
    graticule: { type: "geojson", data: logic.graticule(10) },
    coast: { type: "geojson", data: new URL("static/data/coastlines.geojson", base).href },
    cube: {
      type: "raster",
      tiles: [tileTemplate()],
      tileSize: state.doc.tileSize || 256,
      minzoom: state.doc.minzoom || 0,
      maxzoom: state.doc.maxzoom ?? 22,
      bounds: state.doc.bounds,
    },
    selected: { type: "geojson", data: { type: "FeatureCollection", features: [] } },
  };
  const layers = [{ id: "background", type: "background", paint: { "background-color": "#f3efe6" } }];
  const basemap = document.querySelector('meta[name="alveary-basemap"]');
  if (basemap && basemap.content) {
    sources.basemap = { type: "raster", tiles: [basemap.content], tileSize: 256 };
    layers.push({ id: "basemap", type: "raster", source: "basemap" });
  }
  layers.push(
    { id: "graticule", type: "line", source: "graticule", paint: { "line-color": "#d8d0bf", "line-width": 0.6 } },
    {
      id: "cube",
      type: "raster",
      source: "cube",
      paint: { "raster-resampling": "nearest", "raster-fade-duration": 0, "raster-opacity": 1 },
    },
    { id: "coast", type: "line", source: "coast", paint: { "line-color": "#4a4336", "line-width": 0.8 } },
    {
      id: "selected",
      type: "line",
      source: "selected",
      paint: { "line-color": "#1d1a14", "line-width": 2.2 },
    },
  );
  return { version: 8, sources, layers };
}

function startMap() {
  const hasView = /^#\d/.test(window.location.hash);
  const map = new maplibregl.Map({
    container: "map",
    style: style(),
    hash: true,
    attributionControl: { compact: true, customAttribution: "coastlines: Natural Earth" },
    renderWorldCopies: true,
    fadeDuration: 0,
    maxZoom: 20,
  });
  state.map = map;
  map.addControl(new maplibregl.NavigationControl({ showCompass: false }), "top-left");
  map.addControl(new maplibregl.ScaleControl({ unit: "metric" }), "bottom-left");
  if (!hasView && state.doc.bounds) {
    const [w, s, e, n] = state.doc.bounds;
    map.fitBounds([[w, s], [e, n]], { padding: 30, animate: false, maxZoom: 8 });
  }
  map.on("idle", () => {
    if (map.getSource("cube") && map.isSourceLoaded("cube")) document.body.dataset.tiles = "loaded";
  });
  map.on("dataloading", (e) => {
    if (e.sourceId === "cube") markLoading();
  });
  map.on("error", (e) => {
    if (e && e.sourceId === "cube") status(`a tile could not be drawn: ${e.error && e.error.message}`, true);
  });
  map.on("click", (e) => inspect(e.lngLat.wrap()));
}

async function inspect(lngLat) {
  state.clicked = lngLat;
  const lat = lngLat.lat;
  const lon = lngLat.lng;
  const level = logic.levelAt(lat, state.map.getZoom(), state.doc);
  const t = times();
  const info = variableInfo();
  const panel = $("zone");
  panel.hidden = false;
  $("zone-where").textContent = `${lat.toFixed(4)}°, ${lon.toFixed(4)}° · level ${level}`;
  try {
    const [zone, series] = await Promise.all([
      getJSON(api("zones", { lat: lat.toFixed(6), lon: lon.toFixed(6), level })),
      getJSON(
        api(`cubes/${encodeURIComponent(state.cube.id)}/point`, {
          lat: lat.toFixed(6),
          lon: lon.toFixed(6),
          level,
          vars: state.variable,
          datetime: t.length ? `${t[0]}/${t[t.length - 1]}` : null,
          ...analysisParams(),
        }),
      ),
    ]);
    if (state.clicked !== lngLat) return; // a newer click won
    panel.dataset.zone = zone.zone_text;
    panel.dataset.lat = String(lat);
    panel.dataset.lon = String(lon);
    panel.dataset.level = String(level);
    $("zone-id").textContent = zone.zone_text;
    $("zone-number").textContent = String(zone.zone);
    const row = (series.zones || [])[0];
    const values = row ? row.values[state.variable] : [];
    const seriesTimes = series.times || [];
    const at = seriesTimes.indexOf(t[state.step]);
    const value = at >= 0 ? values[at] : null;
    $("zone-value").textContent = logic.formatValue(value, info.units);
    $("zone-step").textContent = t[state.step] || "";
    const shown = state.analysis === "values" ? "" : ` (${ANALYSES[state.analysis].label})`;
    const drawn = drawSeries($("chart"), seriesTimes, values, {
      units: info.units,
      selected: at,
      label: `${info.long_name || state.variable}${shown} in zone ${zone.zone_text}`,
    });
    $("chart").dataset.points = String(drawn);
    if (zone.geometry) {
      state.map.getSource("selected").setData({ type: "Feature", properties: {}, geometry: zone.geometry });
    }
    status("");
  } catch (err) {
    status(String(err.message || err), true);
  }
}

async function chooseCube(id, query) {
  markLoading();
  state.cube = await getJSON(api(`cubes/${encodeURIComponent(id)}`));
  state.doc = await getJSON(api(`collections/${encodeURIComponent(id)}/map/tiles`));
  $("cube").value = id;
  $("cube-title").textContent = state.cube.title || id;
  fillPickers(query);
  if (!state.map) startMap();
  else {
    state.map.setStyle(style());
    if (state.doc.bounds) {
      const [w, s, e, n] = state.doc.bounds;
      state.map.fitBounds([[w, s], [e, n]], { padding: 30, animate: false, maxZoom: 8 });
    }
  }
  refreshTiles();
}

async function main() {
  const query = new URLSearchParams(window.location.search);
  try {
    const listing = await getJSON(api("cubes"));
    state.cubes = (listing.cubes || []).filter((c) => c.available);
    if (!state.cubes.length) {
      status("This service publishes no cube that can be shown now.", true);
      return;
    }
    $("cube").replaceChildren(...state.cubes.map((c) => option(c.id, c.title || c.id)));
    const wanted = state.cubes.find((c) => c.id === query.get("cube"));
    await chooseCube((wanted || state.cubes[0]).id, query);
  } catch (err) {
    status(String(err.message || err), true);
    return;
  }
  $("cube").addEventListener("change", (e) => chooseCube(e.target.value, new URLSearchParams()));
  $("variable").addEventListener("change", (e) => {
    state.variable = e.target.value;
    refreshTiles();
  });
  $("analysis").addEventListener("change", (e) => {
    state.analysis = e.target.value;
    refreshTiles();
  });
  $("colormap").addEventListener("change", (e) => {
    state.colormap = e.target.value;
    refreshTiles();
  });
  let pending = null;
  $("step").addEventListener("input", (e) => {
    state.step = Number(e.target.value);
    $("step-label").textContent = times()[state.step] || "";
    clearTimeout(pending);
    pending = setTimeout(refreshTiles, 150);
  });
}

// For people at the browser console, and for the page's own tests.
window.alveary = { state, logic, inspect };
main();

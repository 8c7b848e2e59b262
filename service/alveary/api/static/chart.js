// A small time-series chart in plain SVG: one point per time step with data, a line
// through consecutive points (broken where a step has no data), the shown step marked.

import { formatValue, niceTicks } from "./maplogic.js";

const SVG = "http://www.w3.org/2000/svg";

function el(name, attrs = {}, text = null) {
  const node = document.createElementNS(SVG, name);
  for (const [k, v] of Object.entries(attrs)) node.setAttribute(k, String(v));
  if (text !== null) node.textContent = text;
  return node;
}

function shortDate(text) {
  return text ? text.replace(/T00:00:00Z$/, "").replace("T", " ").replace(/:00Z$/, "Z") : "";
}

/**
 * Draw `values` (numbers or null) against `times` (RFC 3339 texts) into an <svg>.
 * Options: units, selected (index of the shown step), label.
 */
export function drawSeries(svg, times, values, { units = "", selected = -1, label = "" } = {}) {
  while (svg.firstChild) svg.removeChild(svg.firstChild);
  const width = 300;
  const height = 170;
  const pad = { left: 46, right: 10, top: 12, bottom: 34 };
  svg.setAttribute("viewBox", `0 0 ${width} ${height}`);
  svg.setAttribute("role", "img");
  svg.appendChild(el("title", {}, label || "time series"));

  const have = values.map((v) => v !== null && v !== undefined && !Number.isNaN(v));
  const finite = values.filter((_, i) => have[i]);
  if (!finite.length) {
    svg.appendChild(el("text", { x: width / 2, y: height / 2, "text-anchor": "middle", class: "empty" }, "no data here"));
    return 0;
  }
  let lo = Math.min(...finite);
  let hi = Math.max(...finite);
  if (hi === lo) {
    const d = Math.abs(lo) * 0.05 || 1;
    lo -= d;
    hi += d;
  }
  const n = values.length;
  const x = (i) => pad.left + (n === 1 ? 0.5 : i / (n - 1)) * (width - pad.left - pad.right);
  const y = (v) => pad.top + (1 - (v - lo) / (hi - lo)) * (height - pad.top - pad.bottom);

  const axes = el("g", { class: "axes" });
  for (const t of niceTicks(lo, hi, 4)) {
    axes.appendChild(el("line", { x1: pad.left, x2: width - pad.right, y1: y(t), y2: y(t), class: "grid" }));
    axes.appendChild(el("text", { x: pad.left - 5, y: y(t) + 4, "text-anchor": "end" }, formatValue(t, "")));
  }
  axes.appendChild(el("text", { x: pad.left, y: height - 8, "text-anchor": "start" }, shortDate(times[0])));
  axes.appendChild(el("text", { x: width - pad.right, y: height - 8, "text-anchor": "end" }, shortDate(times[n - 1])));
  if (units) axes.appendChild(el("text", { x: 4, y: pad.top - 2, class: "units" }, units));
  svg.appendChild(axes);

  // the line, broken at missing steps
  let path = "";
  let pen = false;
  values.forEach((v, i) => {
    if (!have[i]) {
      pen = false;
      return;
    }
    path += `${pen ? "L" : "M"}${x(i).toFixed(1)},${y(v).toFixed(1)}`;
    pen = true;
  });
  svg.appendChild(el("path", { d: path, class: "series" }));

  const dots = el("g", { class: "points" });
  let count = 0;
  values.forEach((v, i) => {
    if (!have[i]) return;
    const dot = el("circle", {
      cx: x(i).toFixed(1),
      cy: y(v).toFixed(1),
      r: i === selected ? 4 : n > 60 ? 1.4 : 2.4,
      class: i === selected ? "point selected" : "point",
      "data-step": i,
    });
    dot.appendChild(el("title", {}, `${shortDate(times[i])}: ${formatValue(v, units)}`));
    dots.appendChild(dot);
    count += 1;
  });
  svg.appendChild(dots);
  return count;
}

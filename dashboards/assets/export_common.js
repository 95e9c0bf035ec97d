"use strict";
// What both offline pages share (levelwise export_html puts it before the page's own script): number format,
// element builder, the prediction engine's numbers at one model row, and the surface colour ramp.
function fmt(v) {
  if (!isFinite(v)) { return "not available"; }
  return Math.abs(v) >= 1e-3 || v === 0 ? Number(v.toPrecision(4)).toString() : v.toExponential(3);
}

function el(tag, attrs, parent) {
  const ns = ["svg", "path", "line", "text", "rect", "polygon", "g"].includes(tag) ? "http://www.w3.org/2000/svg" : null;
  const node = ns ? document.createElementNS(ns, tag) : document.createElement(tag);
  for (const [k, v] of Object.entries(attrs || {})) {
    if (k === "text") { node.textContent = v; } else { node.setAttribute(k, v); }
  }
  if (parent) { parent.appendChild(node); }
  return node;
}

// The slice views' colour map (levelwise.widgets.style.CIVIDIS: dark blue to yellow), interpolated between its
// stops: the same in every surface.
const RAMP = [[0, 32, 77], [65, 77, 107], [124, 123, 120], [188, 175, 111], [255, 234, 70]];
function colour(t) {
  const u = Math.max(0, Math.min(1, t)) * (RAMP.length - 1), k = Math.min(Math.floor(u), RAMP.length - 2), w = u - k;
  return RAMP[k].map((c, j) => Math.round(c + (RAMP[k + 1][j] - c) * w));
}

// The engine's payload (levelwise PredictionEngine.payload) at one model row: the mean, h = ||row F||^2, the CI and
// PI half-widths c sqrt(h) and c sqrt(h + extra), and the leverage part of the extrapolation rule.
function rowBands(m, row) {
  let mean = 0.0, h = 0.0;
  for (let j = 0; j < row.length; j++) { mean += row[j] * m.beta[j]; }
  const r = m.cov_factor.length ? m.cov_factor[0].length : 0;
  for (let c = 0; c < r; c++) {
    let v = 0.0;
    for (let j = 0; j < row.length; j++) { v += row[j] * m.cov_factor[j][c]; }
    h += v * v;
  }
  const c = (m.c === null || m.extra === null) ? NaN : m.c;
  return {mean: mean, h: h, ciHalf: c * Math.sqrt(h), piHalf: c * Math.sqrt(h + m.extra),
          outside: m.limit !== null && h > m.limit};
}

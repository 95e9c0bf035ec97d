// After export_common.js (fmt, el, colour).
// The offline page of a mixture study. Every number is the prediction engine's payload evaluated here
// (levelwise MixtureEngine.payload): a blend becomes the model variables, then the engine's formulas.
const DATA = JSON.parse(document.getElementById("lw-data").textContent);
const MODELS = DATA.responses, MIX = MODELS.length ? MODELS[0].mixture : null;
const NAMES = MIX ? MIX.components : [], Q = NAMES.length, T = MIX ? MIX.total : 1, PROC = MIX ? MIX.process : [];
const SQRT3_2 = Math.sqrt(3) / 2;
const blend = DATA.mixture.start.slice(), proc = PROC.map(p => p.center);
let shown = 0;

// A blend -> the model variables: (x_i - offset_i) / divisor for a component, (x - centre) / half-range for a
// process factor; then the engine's rows: coded = (v - centre) / scale, row_j = prod coded^E.
function predict(m, x, pr) {
  const mm = m.mixture, at = {};
  mm.components.forEach((n, i) => { at[n] = (x[i] - mm.offset[i]) / mm.divisor; });
  mm.process.forEach((p, j) => { at[p.name] = (pr[j] - p.center) / p.half_range; });
  const coded = m.factors.map((n, i) => (at[n] - m.center[i]) / m.scale[i]);
  const row = m.exponents.map(e => {
    let v = 1.0;
    for (let i = 0; i < e.length; i++) { for (let p = 0; p < e[i]; p++) { v *= coded[i]; } }
    return v;
  });
  const {mean, h, ciHalf, piHalf, outside: high} = rowBands(m, row);
  let outside = high;
  m.factors.forEach((n, i) => { if (m.used[i] && (coded[i] < m.low[i] || coded[i] > m.high[i])) { outside = true; } });
  return {mean: mean, ci_low: mean - ciHalf, ci_high: mean + ciHalf, pi_low: mean - piHalf, pi_high: mean + piHalf,
          leverage: h, extrapolated: outside, ci_half: ciHalf, pi_half: piHalf};
}

// The region's inequalities A x <= b over the declared bounds and the constraints (the Cox moves' region).
function inequalities(low, high) {
  const rows = [];
  for (let j = 0; j < Q; j++) {
    const a = new Array(Q).fill(0), b = new Array(Q).fill(0);
    a[j] = -1; b[j] = 1;
    rows.push([a, -low[j]], [b, high[j]]);
  }
  MIX.G.forEach((g, k) => rows.push([g, MIX.h[k]]));
  return rows;
}
const COX_ROWS = MIX ? inequalities(MIX.declared_low, MIX.declared_high) : [];
const REGION_ROWS = MIX ? inequalities(MIX.low, MIX.high) : [];

// Component i's Cox line from the blend r: x(t) = A + t B, x_i = t, x_j = r_j (T - t) / (T - r_i) (from a pure
// blend the others share equally), over the t that keep every inequality (levelwise _cox_lines).
function coxLine(r, i) {
  const rest = T - r[i], A = [], B = [];
  for (let j = 0; j < Q; j++) {
    const share = j === i ? 0 : (rest > 1e-12 * T ? r[j] / rest : 1 / (Q - 1));
    A.push(share * T); B.push((j === i ? 1 : 0) - share);
  }
  let lo = -Infinity, hi = Infinity;
  COX_ROWS.forEach(([g, b]) => {
    let slope = 0, used = 0;
    for (let j = 0; j < Q; j++) { slope += B[j] * g[j]; used += A[j] * g[j]; }
    const ratio = (b - used) / slope;
    if (slope > 1e-12) { hi = Math.min(hi, ratio); } else if (slope < -1e-12) { lo = Math.max(lo, ratio); }
  });
  return {A: A, B: B, lo: lo, hi: hi};
}

function moveComponent(i, amount) {
  const line = coxLine(blend, i), t = Math.min(Math.max(amount, line.lo), line.hi);
  for (let j = 0; j < Q; j++) { blend[j] = line.A[j] + t * line.B[j]; }
  blend[i] = t;
}

const controls = document.getElementById("lw-controls"), sliders = [];
NAMES.forEach((name, i) => {
  const label = el("label", {}, controls), units = DATA.mixture.components[i].units;
  el("span", {text: name + (units ? " (" + units + ") " : " ")}, label);
  const input = el("input", {type: "range", min: MIX.low[i], max: MIX.high[i], step: (MIX.high[i] - MIX.low[i]) / 200,
                             value: blend[i], class: "lw-range lw-mix-range", "data-component": name}, label);
  const value = el("span", {class: "lw-value"}, label);
  el("span", {class: "lw-note", text: " bounds " + fmt(MIX.declared_low[i]) + " to " + fmt(MIX.declared_high[i])}, label);
  input.addEventListener("input", () => { moveComponent(i, parseFloat(input.value)); update(); });
  sliders.push({input: input, value: value, get: () => blend[i]});
});
PROC.forEach((p, j) => {
  const label = el("label", {}, controls);
  el("span", {text: p.name + (p.units ? " (" + p.units + ") " : " ")}, label);
  const input = el("input", {type: "range", min: p.low, max: p.high, step: (p.high - p.low) / 100, value: p.center,
                             class: "lw-range", "data-factor": p.name}, label);
  const value = el("span", {class: "lw-value"}, label);
  input.addEventListener("input", () => { proc[j] = parseFloat(input.value); update(); });
  sliders.push({input: input, value: value, get: () => proc[j]});
});

const responseSelect = document.getElementById("lw-response");
MODELS.forEach((m, r) => el("option", {value: r, text: m.name}, responseSelect));
responseSelect.addEventListener("change", () => { shown = parseInt(responseSelect.value, 10); update(); });
document.getElementById("lw-fingerprint").textContent = DATA.fingerprint;
const corners = ["lw-ta", "lw-tb", "lw-tc"].map(id => document.getElementById(id));
corners.forEach((select, k) => {
  NAMES.forEach((n, i) => el("option", {value: i, text: n}, select));
  select.value = Math.min(k, Q - 1);
  select.addEventListener("change", update);
});

const COLORS = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000", "#F0E442"];
function drawCox(m) {
  const svg = document.getElementById("lw-cox"), W = 620, H = 340, L = 56, R = 110, TOP = 16, B = 40, n = 41;
  while (svg.firstChild) { svg.removeChild(svg.firstChild); }
  const curves = NAMES.map((name, i) => {
    const line = coxLine(blend, i), xs = [], rows = [];
    for (let k = 0; k < n; k++) {
      const t = line.lo + (line.hi - line.lo) * k / (n - 1), x = line.A.map((a, j) => a + t * line.B[j]);
      x[i] = t;
      xs.push((t - blend[i]) / T); rows.push(predict(m, x, proc));
    }
    return {xs: xs, rows: rows};
  });
  const all = curves.flatMap(c => c.rows), allx = curves.flatMap(c => c.xs);
  const lo = Math.min(...all.map(p => p.pi_low)), hi = Math.max(...all.map(p => p.pi_high));
  const xlo = Math.min(...allx), xhi = Math.max(...allx), pad = 0.05 * ((hi - lo) || 1);
  const X = x => L + (W - L - R) * (x - xlo) / ((xhi - xlo) || 1);
  const Y = y => TOP + (H - TOP - B) * (1 - (y - (lo - pad)) / ((hi + pad) - (lo - pad)));
  curves.forEach((c, i) => {
    const col = COLORS[i % COLORS.length];
    const band = (a, b) => c.xs.map((x, k) => X(x) + "," + Y(c.rows[k][a])).join(" ") + " " +
        c.xs.map((x, k) => X(x) + "," + Y(c.rows[k][b])).reverse().join(" ");
    el("polygon", {points: band("pi_low", "pi_high"), fill: col, "fill-opacity": 0.06, stroke: col,
                   "stroke-dasharray": "4 3", class: "lw-pi-band"}, svg);
    el("polygon", {points: band("ci_low", "ci_high"), fill: col, "fill-opacity": 0.18, stroke: col,
                   class: "lw-ci-band"}, svg);
    el("path", {d: "M" + c.xs.map((x, k) => X(x) + "," + Y(c.rows[k].mean)).join(" L"), fill: "none", stroke: col,
                "stroke-width": 2.5, class: "lw-mean-line", "data-component": NAMES[i]}, svg);
    el("text", {x: W - R + 8, y: TOP + 16 * (i + 1), "font-size": 12, fill: col, text: NAMES[i]}, svg);
  });
  const cur = predict(m, blend, proc), cx = X(0), cy = Y(cur.mean);
  el("polygon", {points: [cx, cy - 7, cx + 6, cy, cx, cy + 7, cx - 6, cy].join(" "), fill: "#000", stroke: "#fff"}, svg);
  el("line", {x1: L, y1: H - B, x2: W - R, y2: H - B, stroke: "#333"}, svg);
  el("line", {x1: L, y1: TOP, x2: L, y2: H - B, stroke: "#333"}, svg);
  el("text", {x: L, y: H - B + 14, "font-size": 11, text: fmt(xlo)}, svg);
  el("text", {x: W - R, y: H - B + 14, "font-size": 11, "text-anchor": "end", text: fmt(xhi)}, svg);
  el("text", {x: (L + W - R) / 2, y: H - 6, "font-size": 12, "text-anchor": "middle",
              text: "change in proportion from the reference blend"}, svg);
  el("text", {x: L - 4, y: TOP + 4, "font-size": 11, "text-anchor": "end", text: fmt(hi + pad)}, svg);
  el("text", {x: L - 4, y: H - B, "font-size": 11, "text-anchor": "end", text: fmt(lo - pad)}, svg);
  el("text", {x: L + 4, y: TOP + 10, "font-size": 12, "font-weight": "bold",
              text: m.name + (m.units ? " (" + m.units + ")" : "")}, svg);
}

// The ternary slice: levelwise ternary_grid's arithmetic. (x, y) -> c = y / (sqrt(3)/2), b = x - c/2, a = 1 - b - c;
// the three amounts are L + (a, b, c) (S - sum L), L the three lower bounds, S what the held components leave.
function ternaryFrame(axes) {
  let held = 0;
  for (let j = 0; j < Q; j++) { if (!axes.includes(j)) { held += blend[j]; } }
  const share = T - held;
  let lows = axes.map(i => MIX.low[i]);
  if (lows[0] + lows[1] + lows[2] >= share * (1 - 1e-9)) { lows = [0, 0, 0]; }
  return {share: share, lows: lows, span: share - (lows[0] + lows[1] + lows[2])};
}

function ternaryPoint(m, axes, frame, x, y) {
  const c = y / SQRT3_2, b = x - 0.5 * c, a = 1 - b - c, bary = [a, b, c];
  if (Math.min(a, b, c) < -1e-12) { return null; }
  const amounts = blend.slice();
  axes.forEach((i, k) => { amounts[i] = frame.lows[k] + bary[k] * frame.span; });
  for (const [g, h] of REGION_ROWS) {
    let v = 0;
    for (let j = 0; j < Q; j++) { v += g[j] * amounts[j]; }
    if (v > h + 1e-9 * T) { return null; }
  }
  return predict(m, amounts, proc);
}

function ternaryGrid(m, axes, nx, ny) {
  const frame = ternaryFrame(axes), out = {mean: [], ci_half: [], pi_half: []};
  for (let r = 0; r < ny; r++) {
    const y = r === ny - 1 ? SQRT3_2 : r * (SQRT3_2 / (ny - 1));
    for (let k = 0; k < nx; k++) {
      const x = k === nx - 1 ? 1 : k / (nx - 1), p = ternaryPoint(m, axes, frame, x, y);
      out.mean.push(p ? p.mean : null); out.ci_half.push(p ? p.ci_half : null); out.pi_half.push(p ? p.pi_half : null);
    }
  }
  out.frame = frame;
  return out;
}

const PAD = 40, canvas = document.getElementById("lw-tcanvas");
const toPx = (x, y) => [PAD + x * (canvas.width - 2 * PAD), canvas.height - PAD - y * (canvas.width - 2 * PAD)];

function drawTernary(m) {
  const axes = corners.map(s => parseInt(s.value, 10));
  const ctx = canvas.getContext("2d"), W = canvas.width, H = canvas.height;
  ctx.clearRect(0, 0, W, H);
  const refused = document.getElementById("lw-ternary-refused");
  if (Q < 3 || new Set(axes).size !== 3) {
    document.getElementById("lw-ternary-range").textContent = "Choose three different components.";
    return;
  }
  const nx = 91, ny = 79, grid = ternaryGrid(m, axes, nx, ny), vals = grid.mean.filter(v => v !== null);
  const lo = Math.min(...vals), hi = Math.max(...vals), cw = (W - 2 * PAD) / (nx - 1), ch = (W - 2 * PAD) * SQRT3_2 / (ny - 1);
  for (let r = 0; r < ny; r++) {
    for (let k = 0; k < nx; k++) {
      const v = grid.mean[r * nx + k];
      if (v === null) { continue; }
      const c = colour((v - lo) / ((hi - lo) || 1)), [px, py] = toPx(k / (nx - 1), r * SQRT3_2 / (ny - 1));
      ctx.fillStyle = "rgb(" + c.join(",") + ")";
      ctx.fillRect(px - cw / 2, py - ch / 2, cw + 0.6, ch + 0.6);
    }
  }
  ctx.strokeStyle = "#444"; ctx.lineWidth = 1.5; ctx.beginPath();
  [[0, 0], [1, 0], [0.5, SQRT3_2], [0, 0]].forEach(([x, y], k) => { const p = toPx(x, y); k ? ctx.lineTo(...p) : ctx.moveTo(...p); });
  ctx.stroke();
  ctx.fillStyle = "#222"; ctx.font = "13px sans-serif"; ctx.textAlign = "center";
  const f = grid.frame, top = f.lows.map(l => l + f.span);
  [[0, -0.07], [1, -0.07], [0.5, SQRT3_2 + 0.03]].forEach(([x, y], k) => {
    ctx.fillText(NAMES[axes[k]] + " " + fmt(top[k]), ...toPx(x, y));
  });
  ctx.strokeStyle = "#fff"; ctx.lineWidth = 1.5;
  DATA.runs.forEach(run => {
    const a = axes.map((i, k) => run[i] - f.lows[k]), s = a[0] + a[1] + a[2];
    const [px, py] = toPx((a[1] + 0.5 * a[2]) / s, SQRT3_2 * a[2] / s);
    ctx.fillStyle = "#D55E00"; ctx.beginPath(); ctx.arc(px, py, 4, 0, 7); ctx.fill(); ctx.stroke();
  });
  const rb = axes.map((i, k) => (blend[i] - f.lows[k]) / f.span), [mx, my] = toPx(rb[1] + 0.5 * rb[2], SQRT3_2 * rb[2]);
  ctx.fillStyle = "#000"; ctx.strokeStyle = "#fff";
  ctx.beginPath(); ctx.moveTo(mx, my - 8); ctx.lineTo(mx + 7, my); ctx.lineTo(mx, my + 8); ctx.lineTo(mx - 7, my);
  ctx.closePath(); ctx.fill(); ctx.stroke();
  document.getElementById("lw-ternary-range").textContent = m.name + ": expected mean from " + fmt(lo) + " (dark) to " +
    fmt(hi) + " (light)" + (m.units ? " " + m.units : "") + "; " + axes.map(i => NAMES[i]).join(", ") + " share " +
    fmt(f.share) + " of the blend.";
  // Full-precision numbers on a coarse grid for tests (compared with levelwise.ternary_grid).
  const check = ternaryGrid(m, axes, 21, 19);
  document.getElementById("lw-ternary-numbers").setAttribute("data-numbers", JSON.stringify({
    response: m.name, axes: axes.map(i => NAMES[i]), shape: [21, 19], mean: check.mean, ci_half: check.ci_half,
    pi_half: check.pi_half}));
}

canvas.addEventListener("click", ev => {
  const box = canvas.getBoundingClientRect(), axes = corners.map(s => parseInt(s.value, 10));
  const px = (ev.clientX - box.left) * canvas.width / box.width, py = (ev.clientY - box.top) * canvas.height / box.height;
  const x = (px - PAD) / (canvas.width - 2 * PAD), y = (canvas.height - PAD - py) / (canvas.width - 2 * PAD);
  const c = y / SQRT3_2, b = x - 0.5 * c, a = 1 - b - c, refused = document.getElementById("lw-ternary-refused");
  const frame = ternaryFrame(axes);
  if (Math.min(a, b, c) < -1e-9 || ternaryPoint(MODELS[shown], axes, frame, x, y) === null) {
    refused.textContent = "That point lies outside the triangle or the component bounds: the blend was not moved.";
    return;
  }
  refused.textContent = "";
  const bary = [a, b, c].map(v => Math.max(v, 0)), s = bary[0] + bary[1] + bary[2];
  axes.forEach((i, k) => { blend[i] = frame.lows[k] + bary[k] / s * frame.span; });
  update();
});

function update() {
  sliders.forEach(s => {
    if (parseFloat(s.input.value) !== s.get()) { s.input.value = s.get(); }
    s.value.textContent = fmt(s.get());
  });
  const units = DATA.mixture.components[0].units;
  document.getElementById("lw-total").textContent = "Blend total: " + fmt(blend.reduce((a, b) => a + b, 0)) +
    (units ? " " + units : "") + " (every blend sums to " + fmt(T) + ").";
  const numbers = {settings: {}, responses: {}};
  NAMES.forEach((n, i) => { numbers.settings[n] = blend[i]; });
  PROC.forEach((p, j) => { numbers.settings[p.name] = proc[j]; });
  const table = document.getElementById("lw-pred");
  table.innerHTML = "";
  const head = el("tr", {}, table);
  ["Response", "Expected mean", "95% confidence interval for the mean",
   "95% prediction interval for a single new run"].forEach(t => el("th", {text: t}, head));
  MODELS.forEach(m => {
    const p = predict(m, blend, proc), u = m.units ? " " + m.units : "";
    numbers.responses[m.name] = {mean: p.mean, ci_low: p.ci_low, ci_high: p.ci_high, pi_low: p.pi_low,
                                 pi_high: p.pi_high, leverage: p.leverage, extrapolated: p.extrapolated};
    const tr = el("tr", {class: "lw-pred-row", "data-response": m.name}, table);
    el("td", {text: m.name}, tr);
    el("td", {class: "lw-mean", text: fmt(p.mean) + u}, tr);
    el("td", {class: "lw-ci", text: fmt(p.ci_low) + " to " + fmt(p.ci_high) + u}, tr);
    el("td", {class: "lw-pi", text: fmt(p.pi_low) + " to " + fmt(p.pi_high) + u}, tr);
  });
  document.getElementById("lw-numbers").setAttribute("data-numbers", JSON.stringify(numbers));
  const flagged = MODELS.filter(m => numbers.responses[m.name].extrapolated).map(m => m.name);
  document.getElementById("lw-extrapolation").textContent = flagged.length ?
    "Outside the region the runs support: the prediction for " + flagged.join(", ") + " is an extrapolation." : "";
  if (!MODELS.length) { return; }
  const m = MODELS[shown];
  drawCox(m);
  drawTernary(m);
}
update();

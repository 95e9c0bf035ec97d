// After export_common.js (fmt, el, colour).
const DATA = JSON.parse(document.getElementById("lw-data").textContent);
const F = DATA.factors, K = F.length;
// A categorical factor has "levels"; its setting is the index of the chosen level.
const isCat = f => Array.isArray(f.levels);
const CONT = F.map((f, i) => i).filter(i => !isCat(F[i]));
const CAT = new Set(F.filter(isCat).map(f => f.name));  // no range check: a level is never outside
const settings = F.map(f => isCat(f) ? 0 : f.center);
let shown = 0;

// Exactly the prediction engine's payload (levelwise PredictionEngine.payload): m.factors names the model's
// factors; a factor the model does not use stays at its centre (its exponents are all 0). The coded variables
// m.vars: (x - centre) / scale for a continuous factor, a contrast column's value at the chosen level for a
// categorical one (its setting here is the level's label).
function modelRow(m, at) {
  const index = {};
  m.factors.forEach((name, i) => { index[name] = i; });
  const coded = m.vars.map(v => {
    const x = at[v.factor];
    if (v.levels) {
      const c = v.levels.indexOf(String(x));
      return c < 0 ? NaN : v.values[c];
    }
    const i = index[v.factor];
    return ((x === undefined ? m.center[i] : x) - m.center[i]) / m.scale[i];
  });
  return m.exponents.map(e => {
    let v = 1.0;
    for (let i = 0; i < e.length; i++) { for (let p = 0; p < e[i]; p++) { v *= coded[i]; } }
    return v;
  });
}

// Inverse links of a count response's fit (levelwise GlmFit): logistic, normal distribution function, exponential.
// The normal one by its everywhere-convergent series Phi(x) = 1/2 + phi(x) sum x^(2n+1) / (1 3 5 ... (2n+1)),
// whose terms are all of one sign (no cancellation inside the sum); 0 or 1 beyond |x| = 9.
function normalCdf(x) {
  if (x < -9) { return 0.0; }
  if (x > 9) { return 1.0; }
  let term = x, sum = x;
  for (let n = 1; n < 500 && Math.abs(term) > 1e-17 * Math.abs(sum); n++) { term *= x * x / (2 * n + 1); sum += term; }
  return 0.5 + Math.exp(-0.5 * x * x) / Math.sqrt(2 * Math.PI) * sum;
}
const INVERSE = {logit: v => v >= 0 ? 1 / (1 + Math.exp(-v)) : Math.exp(v) / (1 + Math.exp(v)), probit: normalCdf,
                 log: Math.exp};
// Shown numbers: a probability as a percentage.
const shownValue = (m, v) => m.percent ? 100 * v : v;
const shownUnits = m => m.percent ? "%" : (m.link === "log" ? (m.units ? m.units + " " : "") + "per unit exposure" : m.units);

function predict(m, x) {
  const at = {};
  F.forEach((f, i) => { at[f.name] = isCat(f) ? String(f.levels[x[i]]) : x[i]; });
  const {mean, h, ciHalf, piHalf, outside: high} = rowBands(m, modelRow(m, at));
  let outside = high;
  m.factors.forEach((name, i) => {
    if (m.used[i] && !CAT.has(name) && (at[name] < m.low[i] || at[name] > m.high[i])) { outside = true; }
  });
  if (m.link) {  // a count: the CI made on the link scale and transformed; no interval for one new count
    const inv = INVERSE[m.link];
    return {mean: inv(mean), ci_low: inv(mean - ciHalf), ci_high: inv(mean + ciHalf), pi_low: NaN, pi_high: NaN,
            link_mean: mean, leverage: h, extrapolated: outside};
  }
  return {mean: mean, ci_low: mean - ciHalf, ci_high: mean + ciHalf, pi_low: mean - piHalf, pi_high: mean + piHalf,
          leverage: h, extrapolated: outside};
}

// A prediction in shown units (a probability as a percentage).
function display(m, p) {
  const out = Object.assign({}, p);
  ["mean", "ci_low", "ci_high", "pi_low", "pi_high"].forEach(k => { out[k] = shownValue(m, p[k]); });
  return out;
}

const sliders = [];
const controls = document.getElementById("lw-controls");
F.forEach((f, i) => {
  const label = el("label", {}, controls);
  el("span", {text: f.name + (f.units ? " (" + f.units + ") " : " ")}, label);
  if (isCat(f)) {
    const input = el("select", {class: "lw-level", "data-factor": f.name}, label);
    f.levels.forEach((level, k) => el("option", {value: k, text: String(level)}, input));
    const value = el("span", {class: "lw-value"}, label);
    input.addEventListener("change", () => { settings[i] = parseInt(input.value, 10); update(); });
    sliders.push({input: input, value: value});
    return;
  }
  const input = el("input", {type: "range", min: f.low, max: f.high, step: (f.high - f.low) / 100,
                             value: f.center, class: "lw-range", "data-factor": f.name}, label);
  const value = el("span", {class: "lw-value"}, label);
  input.addEventListener("input", () => { settings[i] = parseFloat(input.value); update(); });
  sliders.push({input: input, value: value});
});

const responseSelect = document.getElementById("lw-response");
DATA.responses.forEach((m, r) => el("option", {value: r, text: m.name}, responseSelect));
responseSelect.addEventListener("change", () => { shown = parseInt(responseSelect.value, 10); update(); });
const sx = document.getElementById("lw-sx"), sy = document.getElementById("lw-sy");
CONT.forEach(i => { el("option", {value: i, text: F[i].name}, sx); el("option", {value: i, text: F[i].name}, sy); });
if (CONT.length) { sx.value = CONT[0]; sy.value = CONT[Math.min(1, CONT.length - 1)]; }
sx.addEventListener("change", update); sy.addEventListener("change", update);
document.getElementById("lw-fingerprint").textContent = DATA.fingerprint;

// A categorical factor's trace: the mean at each level with its confidence interval.
function drawLevels(svg, m, i) {
  const W = 280, H = 200, L = 48, R = 8, T = 22, B = 34, f = F[i];
  const rows = f.levels.map((level, k) => { const at = settings.slice(); at[i] = k; return display(m, predict(m, at)); });
  const finite = rows.filter(p => isFinite(p.mean));
  const lo = Math.min(...finite.map(p => isFinite(p.ci_low) ? p.ci_low : p.mean));
  const hi = Math.max(...finite.map(p => isFinite(p.ci_high) ? p.ci_high : p.mean));
  const pad = 0.05 * ((hi - lo) || 1);
  const X = k => L + (W - L - R) * (k + 0.5) / f.levels.length;
  const Y = y => T + (H - T - B) * (1 - (y - (lo - pad)) / ((hi + pad) - (lo - pad)));
  rows.forEach((p, k) => {
    if (!isFinite(p.mean)) { return; }
    if (isFinite(p.ci_low)) {
      el("line", {x1: X(k), x2: X(k), y1: Y(p.ci_low), y2: Y(p.ci_high), stroke: "#0072B2", "stroke-width": 3,
                  class: "lw-level-ci"}, svg);
    }
    el("rect", {x: X(k) - 4, y: Y(p.mean) - 4, width: 8, height: 8, fill: k === settings[i] ? "#000" : "#0072B2",
                class: "lw-level-mean"}, svg);
    el("text", {x: X(k), y: H - B + 14, "font-size": 11, "text-anchor": "middle", text: String(f.levels[k])}, svg);
  });
  el("line", {x1: L, y1: H - B, x2: W - R, y2: H - B, stroke: "#333"}, svg);
  el("line", {x1: L, y1: T, x2: L, y2: H - B, stroke: "#333"}, svg);
  el("text", {x: (L + W) / 2, y: H - 4, "font-size": 12, "text-anchor": "middle", text: f.name}, svg);
  el("text", {x: L - 4, y: T + 4, "font-size": 11, "text-anchor": "end", text: fmt(hi + pad)}, svg);
  el("text", {x: L - 4, y: H - B, "font-size": 11, "text-anchor": "end", text: fmt(lo - pad)}, svg);
  el("text", {x: L, y: 14, "font-size": 12, "font-weight": "bold", text: m.name + (shownUnits(m) ? " (" + shownUnits(m) + ")" : "")}, svg);
}

function drawTrace(svg, m, i) {
  const W = 280, H = 200, L = 48, R = 8, T = 22, B = 34;
  while (svg.firstChild) { svg.removeChild(svg.firstChild); }
  if (isCat(F[i])) { drawLevels(svg, m, i); return; }
  const f = F[i], n = 41, xs = [], rows = [];
  for (let k = 0; k < n; k++) {
    const x = f.low + (f.high - f.low) * k / (n - 1);
    const at = settings.slice(); at[i] = x;
    xs.push(x); rows.push(display(m, predict(m, at)));
  }
  const outer = m.link ? ["ci_low", "ci_high"] : ["pi_low", "pi_high"];  // a count has no PI band
  const lo = Math.min(...rows.map(p => p[outer[0]])), hi = Math.max(...rows.map(p => p[outer[1]]));
  const pad = 0.05 * ((hi - lo) || 1);
  const X = x => L + (W - L - R) * (x - f.low) / (f.high - f.low);
  const Y = y => T + (H - T - B) * (1 - (y - (lo - pad)) / ((hi + pad) - (lo - pad)));
  const band = (a, b) => xs.map((x, k) => X(x) + "," + Y(rows[k][a])).join(" ") + " " +
      xs.map((x, k) => X(x) + "," + Y(rows[k][b])).reverse().join(" ");
  if (!m.link) {
    el("polygon", {points: band("pi_low", "pi_high"), fill: "#E69F00", "fill-opacity": 0.18, stroke: "#E69F00",
                   "stroke-dasharray": "4 3", class: "lw-pi-band"}, svg);
  }
  el("polygon", {points: band("ci_low", "ci_high"), fill: "#0072B2", "fill-opacity": 0.30, stroke: "#0072B2",
                 class: "lw-ci-band"}, svg);
  el("path", {d: "M" + xs.map((x, k) => X(x) + "," + Y(rows[k].mean)).join(" L"), fill: "none", stroke: "#0072B2",
              "stroke-width": 2.5, class: "lw-mean-line"}, svg);
  const cur = display(m, predict(m, settings)), cx = X(settings[i]), cy = Y(cur.mean);
  el("polygon", {points: [cx, cy - 7, cx + 6, cy, cx, cy + 7, cx - 6, cy].join(" "), fill: "#000", stroke: "#fff"}, svg);
  el("line", {x1: L, y1: H - B, x2: W - R, y2: H - B, stroke: "#333"}, svg);
  el("line", {x1: L, y1: T, x2: L, y2: H - B, stroke: "#333"}, svg);
  el("text", {x: L, y: H - B + 14, "font-size": 11, text: fmt(f.low)}, svg);
  el("text", {x: W - R, y: H - B + 14, "font-size": 11, "text-anchor": "end", text: fmt(f.high)}, svg);
  el("text", {x: (L + W) / 2, y: H - 4, "font-size": 12, "text-anchor": "middle",
              text: f.name + (f.units ? " (" + f.units + ")" : "")}, svg);
  el("text", {x: L - 4, y: T + 4, "font-size": 11, "text-anchor": "end", text: fmt(hi + pad)}, svg);
  el("text", {x: L - 4, y: H - B, "font-size": 11, "text-anchor": "end", text: fmt(lo - pad)}, svg);
  el("text", {x: L, y: 14, "font-size": 12, "font-weight": "bold", text: m.name + (shownUnits(m) ? " (" + shownUnits(m) + ")" : "")}, svg);
}


function drawSurface(m) {
  if (!CONT.length) { return; }
  const canvas = document.getElementById("lw-canvas"), ctx = canvas.getContext("2d");
  const i = parseInt(sx.value, 10), j = parseInt(sy.value, 10), N = 60;
  const W = canvas.width, H = canvas.height, fi = F[i], fj = F[j];
  const grid = [];
  let lo = Infinity, hi = -Infinity;
  for (let b = 0; b < N; b++) {
    for (let a = 0; a < N; a++) {
      const at = settings.slice();
      at[i] = fi.low + (fi.high - fi.low) * (a + 0.5) / N;
      if (j !== i) { at[j] = fj.low + (fj.high - fj.low) * (1 - (b + 0.5) / N); }
      const v = shownValue(m, predict(m, at).mean);
      grid.push(v); lo = Math.min(lo, v); hi = Math.max(hi, v);
    }
  }
  const img = ctx.createImageData(W, H);
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      const v = grid[Math.floor(y * N / H) * N + Math.floor(x * N / W)];
      const c = colour((v - lo) / ((hi - lo) || 1)), o = 4 * (y * W + x);
      img.data[o] = c[0]; img.data[o + 1] = c[1]; img.data[o + 2] = c[2]; img.data[o + 3] = 255;
    }
  }
  ctx.putImageData(img, 0, 0);
  ctx.strokeStyle = "#fff"; ctx.lineWidth = 1.5;
  DATA.runs.forEach(run => {
    ctx.beginPath();
    ctx.arc(W * (run[i] - fi.low) / (fi.high - fi.low), H * (1 - (run[j] - fj.low) / (fj.high - fj.low)), 4, 0, 7);
    ctx.stroke();
  });
  const px = W * (settings[i] - fi.low) / (fi.high - fi.low), py = H * (1 - (settings[j] - fj.low) / (fj.high - fj.low));
  ctx.fillStyle = "#000"; ctx.strokeStyle = "#fff";
  ctx.beginPath(); ctx.moveTo(px, py - 8); ctx.lineTo(px + 7, py); ctx.lineTo(px, py + 8); ctx.lineTo(px - 7, py);
  ctx.closePath(); ctx.fill(); ctx.stroke();
  document.getElementById("lw-surface-range").textContent =
    m.name + ": expected " + (m.percent ? "pass rate" : "mean") + " from " + fmt(lo) + " (dark) to " + fmt(hi) +
    " (light)" + (shownUnits(m) ? " " + shownUnits(m) : "") +
    "; across: " + fi.name + " " + fmt(fi.low) + " to " + fmt(fi.high) + ", up: " + fj.name + " " + fmt(fj.low) +
    " to " + fmt(fj.high) + ".";
}

document.getElementById("lw-canvas").addEventListener("click", ev => {
  const canvas = ev.currentTarget, box = canvas.getBoundingClientRect();
  if (!CONT.length) { return; }
  const i = parseInt(sx.value, 10), j = parseInt(sy.value, 10);
  const u = (ev.clientX - box.left) / box.width, v = 1 - (ev.clientY - box.top) / box.height;
  settings[i] = F[i].low + (F[i].high - F[i].low) * u;
  if (j !== i) { settings[j] = F[j].low + (F[j].high - F[j].low) * v; }
  update();
});

const traces = document.getElementById("lw-traces");
const traceSvgs = F.map(() => el("svg", {width: 280, height: 200, class: "lw-trace"}, traces));

function update() {
  sliders.forEach((s, i) => {
    if (parseFloat(s.input.value) !== settings[i]) { s.input.value = settings[i]; }
    s.value.textContent = isCat(F[i]) ? "" : fmt(settings[i]);
  });
  const numbers = {settings: {}, responses: {}};
  F.forEach((f, i) => { numbers.settings[f.name] = isCat(f) ? f.levels[settings[i]] : settings[i]; });
  const table = document.getElementById("lw-pred");
  table.innerHTML = "";
  const head = el("tr", {}, table);
  ["Response", "Expected mean", "95% confidence interval for the mean",
   "95% prediction interval for a single new run"].forEach(t => el("th", {text: t}, head));
  DATA.responses.forEach((m, r) => {
    const raw = predict(m, settings), p = display(m, raw), u = shownUnits(m) ? " " + shownUnits(m) : "";
    numbers.responses[m.name] = raw;  // the kernel's numbers (a probability, not %), for the checks
    const tr = el("tr", {class: "lw-pred-row", "data-response": m.name}, table);
    el("td", {text: m.name + (m.percent ? " (pass rate)" : "")}, tr);
    el("td", {class: "lw-mean", text: fmt(p.mean) + u}, tr);
    el("td", {class: "lw-ci", text: fmt(p.ci_low) + " to " + fmt(p.ci_high) + u}, tr);
    if (m.link) {
      el("td", {class: "lw-pi lw-no-pi", title: m.note, text: "not given for a count: " + m.note}, tr);
    } else {
      el("td", {class: "lw-pi", text: fmt(p.pi_low) + " to " + fmt(p.pi_high) + u}, tr);
    }
  });
  document.getElementById("lw-numbers").setAttribute("data-numbers", JSON.stringify(numbers));
  // The engine's extrapolation rule, per response: a used factor outside its range, or leverage above the runs'.
  const outside = F.filter((f, i) => !isCat(f) && (settings[i] < f.low || settings[i] > f.high)).map(f => f.name);
  const flagged = DATA.responses.filter(m => numbers.responses[m.name].extrapolated).map(m => m.name);
  document.getElementById("lw-extrapolation").textContent = flagged.length ?
    "Outside the tested region" + (outside.length ? " (" + outside.join(", ") + ")" : " (far from the runs)") +
    ": the prediction for " + flagged.join(", ") + " is an extrapolation." : "";
  const m = DATA.responses[shown];
  traceSvgs.forEach((svg, i) => drawTrace(svg, m, i));
  drawSurface(m);
}
update();

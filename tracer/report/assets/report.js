// The report page of `tracer report`: a render, a dataset or a dataset's scores.
// Everything is read from data/*.js files (loaded with <script src>, which works from file://);
// float buffers arrive as little-endian half floats in base64 and are decoded here.
"use strict";

const report = { kind: null, model: null };
const view = { exposure: 0, tone: "clamp", zoom: 1 };
const ZOOMS = [1, 2, 3, 4, 6, 8, 12, 16];
const redrawers = new Set();     // functions that repaint when exposure, tone or zoom change
let keyHandler = null;           // the current section's own keys

function tracerReportModel(kind, model) { report.kind = kind; report.model = model; }

// --- data ------------------------------------------------------------------------------------

const HALF = (() => {
  const table = new Float32Array(65536);
  for (let h = 0; h < 65536; h++) {
    const sign = h & 0x8000 ? -1 : 1, exponent = (h >> 10) & 31, fraction = h & 1023;
    table[h] = exponent === 0 ? sign * fraction * 2 ** -24
      : exponent === 31 ? (fraction ? NaN : sign * Infinity)
      : sign * (1 + fraction / 1024) * 2 ** (exponent - 15);
  }
  return table;
})();

function decodeHalf(base64) {
  const bytes = atob(base64), out = new Float32Array(bytes.length >> 1);
  for (let i = 0; i < out.length; i++) out[i] = HALF[bytes.charCodeAt(2 * i) | (bytes.charCodeAt(2 * i + 1) << 8)];
  return out;
}

const bundles = new Map(), waiting = new Map();

function tracerArrive(name, payload) {
  const pending = waiting.get(name);
  if (!pending) return;
  waiting.delete(name);
  const buffers = {};
  for (const [key, buffer] of Object.entries(payload.buffers)) {
    buffers[key] = { channels: buffer.channels, values: decodeHalf(buffer.data) };
  }
  pending.resolve({ name, width: payload.width, height: payload.height, buffers });
}

function loadBundle(name) {
  if (!bundles.has(name)) {
    bundles.set(name, new Promise((resolve, reject) => {
      waiting.set(name, { resolve, reject });
      const script = document.createElement("script");
      script.src = "data/" + encodeURIComponent(name) + ".js";
      script.onerror = () => { waiting.delete(name); reject(new Error("data file missing: data/" + name + ".js")); };
      document.head.appendChild(script);
    }));
  }
  return bundles.get(name);
}

// --- display mapping -------------------------------------------------------------------------

// The sRGB transfer curve of IEC 61966-2-1, on values in [0, 1].
function srgb(x) { return x <= 0.0031308 ? 12.92 * x : 1.055 * Math.pow(x, 1 / 2.4) - 0.055; }

// Tone curves on exposed linear radiance: clamp, or the simple global operator x/(1+x) of
// Reinhard et al. (2002), each followed by the sRGB curve.
const TONES = { clamp: (v) => v, reinhard: (v) => v / (1 + v) };

function displayByte(linear) {
  const v = linear > 0 ? (linear < 1 ? linear : 1) : 0;          // NaN and negatives show black
  return Math.round(255 * srgb(v));
}

function bufferKind(key) {
  if (key === "radiance" || key === "illumination" || key === "background_part") return "radiance";
  if (key === "radiance_variance") return "deviation";
  if (key === "albedo") return "albedo";
  if (key.endsWith("_normal")) return "normal";
  if (key.endsWith("_position")) return "position";
  if (key.endsWith("_hit") || key === "alpha" || key.endsWith("_interface_weight") || key.endsWith("_light_transmittance")
      || key === "opacity_before_event1") return "fraction";
  return "scalar";
}

const KIND_NOTE = {
  radiance: "exposure and tone curve applied",
  deviation: "shown as its square root (standard deviation), same exposure and tone curve",
  albedo: "clamp, then sRGB; no exposure",
  normal: "0.5 n + 0.5 as RGB",
  position: "each axis scaled to its range in the image",
  fraction: "0 black to 1 white",
  scalar: "scaled to its range over nonzero pixels, near (small) bright",
};

function range(values, channels, channel, nonzero) {
  let low = Infinity, high = -Infinity;
  for (let i = channel; i < values.length; i += channels) {
    const v = values[i];
    if (!Number.isFinite(v) || (nonzero && v === 0)) continue;
    if (v < low) low = v;
    if (v > high) high = v;
  }
  return Number.isFinite(low) ? [low, high > low ? high : low + 1] : [0, 1];
}

// RGBA bytes of one buffer as the page shows it.
function paintBytes(image, key) {
  const buffer = image.buffers[key], n = image.width * image.height, out = new Uint8ClampedArray(4 * n);
  const kind = bufferKind(key), c = buffer.channels, values = buffer.values;
  const gain = 2 ** view.exposure, tone = TONES[view.tone];
  const ranges = kind === "position" ? [0, 1, 2].map((k) => range(values, c, k, false))
    : kind === "scalar" ? [range(values, c, 0, true)] : null;
  for (let p = 0; p < n; p++) {
    for (let k = 0; k < 3; k++) {
      const v = values[p * c + (c === 1 ? 0 : k)];
      let byte;
      if (kind === "radiance") byte = displayByte(tone(v * gain));
      else if (kind === "deviation") byte = displayByte(tone(Math.sqrt(Math.max(v, 0)) * gain));
      else if (kind === "albedo") byte = displayByte(v);
      else if (kind === "normal") byte = Math.round(255 * Math.min(1, Math.max(0, 0.5 * v + 0.5)));
      else if (kind === "fraction") byte = Math.round(255 * Math.min(1, Math.max(0, v)));
      else if (kind === "position") { const [lo, hi] = ranges[k]; byte = Math.round(255 * Math.min(1, Math.max(0, (v - lo) / (hi - lo)))); }
      else { const [lo, hi] = ranges[0]; byte = v === 0 || !Number.isFinite(v) ? 0 : Math.round(255 * (1 - 0.85 * (v - lo) / (hi - lo))); }
      out[4 * p + k] = byte;
    }
    out[4 * p + 3] = 255;
  }
  return out;
}

function sizeCanvas(canvas, width, height) {
  if (canvas.width !== width) canvas.width = width;
  if (canvas.height !== height) canvas.height = height;
  canvas.style.width = width * view.zoom + "px";
  canvas.style.height = height * view.zoom + "px";
}

function drawBuffer(canvas, image, key) {
  sizeCanvas(canvas, image.width, image.height);
  canvas.getContext("2d").putImageData(new ImageData(paintBytes(image, key), image.width, image.height), 0, 0);
}

// Left image for columns before the divider, right image from it on.
function drawCompare(canvas, left, right, key, dividerColumn) {
  const width = left.width, height = left.height;
  sizeCanvas(canvas, width, height);
  const a = paintBytes(left, key), b = right === left ? a : paintBytes(right, key), out = new Uint8ClampedArray(a.length);
  for (let y = 0; y < height; y++) {
    const row = 4 * y * width, split = 4 * Math.min(width, Math.max(0, dividerColumn));
    out.set(a.subarray(row, row + split), row);
    out.set(b.subarray(row + split, row + 4 * width), row + split);
  }
  canvas.getContext("2d").putImageData(new ImageData(out, width, height), 0, 0);
}

function pixelUnder(event, canvas) {
  const box = canvas.getBoundingClientRect();
  const x = Math.floor((event.clientX - box.left) / box.width * canvas.width);
  const y = Math.floor((event.clientY - box.top) / box.height * canvas.height);
  return x >= 0 && y >= 0 && x < canvas.width && y < canvas.height ? [x, y] : null;
}

function formatValue(v) {
  if (Number.isNaN(v)) return "NaN";
  if (!Number.isFinite(v)) return v > 0 ? "inf" : "-inf";
  return v === 0 ? "0" : v.toPrecision(5);
}

function valuesAt(image, key, x, y) {
  const buffer = image.buffers[key], c = buffer.channels, at = (y * image.width + x) * c;
  return Array.from(buffer.values.subarray(at, at + c));
}

// Arrow keys move the inspected pixel while an image has the keyboard focus.
function arrowInspect(event, canvas, cursor, inspect) {
  const steps = { ArrowLeft: [-1, 0], ArrowRight: [1, 0], ArrowUp: [0, -1], ArrowDown: [0, 1] };
  if (event.target !== canvas || !steps[event.key]) return false;
  const [dx, dy] = steps[event.key], stride = event.shiftKey ? 8 : 1;
  cursor[0] = Math.min(canvas.width - 1, Math.max(0, cursor[0] + dx * stride));
  cursor[1] = Math.min(canvas.height - 1, Math.max(0, cursor[1] + dy * stride));
  inspect(cursor[0], cursor[1]);
  return true;
}

// --- small DOM helpers -----------------------------------------------------------------------

function el(tag, attributes = {}, ...children) {
  const node = document.createElement(tag);
  for (const [name, value] of Object.entries(attributes)) {
    if (value === null || value === undefined || value === false) continue;
    if (name === "text") node.textContent = value;
    else if (name.startsWith("on")) node.addEventListener(name.slice(2), value);
    else node.setAttribute(name, value === true ? "" : value);
  }
  for (const child of children) if (child !== null && child !== undefined) node.append(child);
  return node;
}

function put(parent, ...children) {
  parent.append(...children.filter((child) => child !== null && child !== undefined));
}

function fixed(value, digits, suffix = "") {
  return value === null || value === undefined ? "n/a" : Number(value).toFixed(digits) + suffix;
}

function readoutTable(rows) {
  // rows: [label, key, values, note]
  const body = el("tbody");
  for (const [label, id, values, note] of rows) {
    body.append(el("tr", {}, el("th", { scope: "row", text: label }),
      el("td", { id: "readout-" + id, class: "num", "data-values": JSON.stringify(values.map(formatValue)),
        text: values.map(formatValue).join("  ") }),
      el("td", { class: "dim", text: note || "" })));
  }
  return el("table", { class: "readout" }, body);
}

// --- shared controls -------------------------------------------------------------------------

function setExposure(stops) {
  view.exposure = Math.round(Math.min(12, Math.max(-12, stops)) * 10) / 10;
  document.getElementById("exposure").value = String(view.exposure);
  document.getElementById("exposure-value").textContent = (view.exposure >= 0 ? "+" : "") + view.exposure.toFixed(1) + " stops";
  redraw();
}

function setZoom(zoom) {
  view.zoom = zoom;
  document.getElementById("zoom").value = String(zoom);
  redraw();
}

function redraw() { for (const draw of redrawers) draw(); }

function setupControls() {
  const zoom = document.getElementById("zoom");
  for (const z of ZOOMS) zoom.append(el("option", { value: z, text: z + "x" }));
  zoom.addEventListener("change", () => setZoom(Number(zoom.value)));
  document.getElementById("exposure").addEventListener("input", (e) => setExposure(Number(e.target.value)));
  document.getElementById("tone").addEventListener("change", (e) => { view.tone = e.target.value; redraw(); });
  document.addEventListener("keydown", (event) => {
    const target = event.target;
    if (event.ctrlKey || event.metaKey || event.altKey) return;
    if (target && (target.tagName === "INPUT" && target.type !== "range" || target.tagName === "TEXTAREA")) return;
    const index = ZOOMS.indexOf(view.zoom);
    if (event.key === ",") setExposure(view.exposure - 0.5);
    else if (event.key === ".") setExposure(view.exposure + 0.5);
    else if (event.key === "0") setExposure(0);
    else if (event.key === "-") setZoom(ZOOMS[Math.max(0, index - 1)]);
    else if (event.key === "=" || event.key === "+") setZoom(ZOOMS[Math.min(ZOOMS.length - 1, index + 1)]);
    else if (keyHandler && keyHandler(event)) { /* handled */ }
    else return;
    event.preventDefault();
  });
}

function fitZoom(width) {
  const room = Math.max(200, Math.min(window.innerWidth - 520, 640));
  let best = 1;
  for (const z of ZOOMS) if (z * width <= room) best = z;
  return best;
}

// --- the render page -------------------------------------------------------------------------

async function renderPage(main) {
  const model = report.model, image = await loadBundle(model.image.bundle);
  let selected = "radiance";
  const canvas = el("canvas", { id: "view", class: "pixels", tabindex: "0", "aria-label": "selected buffer" });
  const caption = el("p", { class: "dim", id: "view-caption" });
  const readout = el("div", { id: "readout", class: "panel" }, el("p", { class: "dim", text: "Hover the image to read its buffers." }));
  const list = el("div", { class: "buffers", role: "listbox", "aria-label": "buffers" });
  const facts = el("dl", { class: "facts" });
  for (const [name, value] of Object.entries(model.facts)) {
    if (value !== null && value !== undefined) facts.append(el("dt", { text: name }), el("dd", { text: String(value) }));
  }
  const buttons = new Map();
  for (const spec of model.buffers) {
    const thumb = el("canvas", { class: "pixels mini" });
    const button = el("button", { class: "buffer", role: "option", "data-key": spec.key, title: spec.description,
      onclick: () => select(spec.key) }, thumb, el("span", { text: spec.key }));
    buttons.set(spec.key, [button, thumb]);
    list.append(button);
  }
  function select(key) {
    selected = key;
    for (const [k, [button]] of buttons) button.setAttribute("aria-selected", String(k === key));
    const spec = model.buffers.find((s) => s.key === key);
    caption.textContent = `${key} (${spec.units}): ${spec.description}; ${KIND_NOTE[bufferKind(key)]}`;
    draw();
  }
  function draw() {
    drawBuffer(canvas, image, selected);
    for (const [key, [, thumb]] of buttons) {
      drawBuffer(thumb, image, key);
      thumb.style.width = Math.min(96, image.width) + "px";
      thumb.style.height = "auto";
    }
  }
  function inspect(x, y) {
    const rows = model.buffers.map((spec) => [spec.key, spec.key, valuesAt(image, spec.key, x, y), spec.units]);
    readout.replaceChildren(el("p", { id: "readout-pixel", text: `pixel x ${x}, y ${y}` }), readoutTable(rows));
  }
  const cursor = [0, 0];
  canvas.addEventListener("mousemove", (event) => { const p = pixelUnder(event, canvas); if (p) { cursor.splice(0, 2, ...p); inspect(...p); } });
  keyHandler = (event) => {
    if (arrowInspect(event, canvas, cursor, inspect)) return true;
    const keys = model.buffers.map((s) => s.key), at = keys.indexOf(selected);
    if (event.key === "b") { select(keys[(at + 1) % keys.length]); return true; }
    if (event.key === "B") { select(keys[(at + keys.length - 1) % keys.length]); return true; }
    return false;
  };
  view.zoom = fitZoom(image.width);
  document.getElementById("zoom").value = String(view.zoom);
  redrawers.add(draw);
  main.replaceChildren(el("div", { class: "split" },
    el("div", { class: "stage" }, el("div", { class: "scroll" }, canvas), caption),
    el("aside", {}, el("h2", { text: "Buffers" }), list, el("p", { class: "hint", text: "b / B: next / previous buffer; with the image focused (Tab), arrow keys move the read-out" }),
      el("h2", { text: "Pixel" }), readout, el("h2", { text: "Render" }), facts)));
  select(selected);
}

// --- the dataset and score pages -------------------------------------------------------------

function itemRow(item, columns) {
  const flagged = item.problems.length > 0;
  const thumbs = el("td", { class: "thumbs" });
  for (const file of item.files) {
    if (file.role === "candidate") continue;
    thumbs.append(file.thumb ? el("img", { src: file.thumb, alt: file.label, title: file.label, loading: "lazy" })
      : el("span", { class: "gap", title: file.label + ": " + file.status, text: "?" }));
  }
  const row = el("tr", { "data-id": item.id, "data-split": item.split, "data-volume": item.volume, class: flagged ? "flagged" : null },
    el("td", {}, el("a", { href: "#item=" + encodeURIComponent(item.id), text: item.id })),
    el("td", { text: item.split }), el("td", { text: item.volume }), el("td", { text: item.transfer_function }),
    el("td", { class: item.certified ? "ok" : "warn", text: item.certified === null || item.certified === undefined ? "n/a" : item.certified ? "certified" : "missed target" }),
    el("td", { class: "num", text: fixed(item.residual_error, 4) }),
    el("td", { class: "num", text: fixed(item.psnr_vs_converged_db, 1, " dB") }),
    thumbs,
    el("td", { class: "problems", text: flagged ? item.problems.join("; ") : "" }));
  return row;
}

function datasetTable(section) {
  const model = report.model, items = model.items;
  const splits = [...new Set(items.map((i) => i.split))], volumes = [...new Set(items.map((i) => i.volume))];
  const splitFilter = el("select", { id: "filter-split" }, el("option", { value: "", text: "all splits" }),
    ...splits.map((s) => el("option", { value: s, text: s })));
  const volumeFilter = el("select", { id: "filter-volume" }, el("option", { value: "", text: "all volumes" }),
    ...volumes.map((v) => el("option", { value: v, text: v })));
  const flaggedOnly = el("input", { id: "filter-flagged", type: "checkbox" });
  const count = el("span", { id: "shown-count", class: "dim" });
  const body = el("tbody", { id: "items" });
  for (const item of items) body.append(itemRow(item));
  function apply() {
    let shown = 0;
    for (const row of body.rows) {
      const item = items[row.sectionRowIndex];
      const visible = (!splitFilter.value || item.split === splitFilter.value) && (!volumeFilter.value || item.volume === volumeFilter.value)
        && (!flaggedOnly.checked || item.problems.length > 0);
      row.hidden = !visible;
      shown += visible;
    }
    count.textContent = `${shown} of ${items.length} items`;
  }
  for (const control of [splitFilter, volumeFilter, flaggedOnly]) control.addEventListener("change", apply);
  const flagged = items.filter((i) => i.problems.length).length;
  const heads = ["item", "split", "volume", "transfer function", "reference", "residual error", "vs converged", "ladder and reference", "problems"];
  put(section, 
    el("div", { class: "filters" }, el("label", {}, "split ", splitFilter), el("label", {}, "volume ", volumeFilter),
      el("label", {}, flaggedOnly, " flagged only"), count),
    flagged ? el("p", { class: "alert", id: "flag-summary", text: `${flagged} item(s) have missing or altered files; they are marked below.` }) : null,
    el("table", { class: "items" }, el("thead", {}, el("tr", {}, ...heads.map((h) => el("th", { scope: "col", text: h })))), body));
  apply();
}

const SCORE_COLUMNS = [
  ["item", (i) => i.id, null], ["split", (i) => i.split, null],
  ["PSNR dB", (i) => i.score.psnr_db, 2], ["SSIM", (i) => i.score.ssim, 4], ["rel. MSE", (i) => i.score.relative_mse, 5],
  ["equal-quality spp", (i) => i.score.equal_quality_spp, 1], ["speedup", (i) => i.score.speedup, 1],
];

function scoreSection(section) {
  const model = report.model, items = model.items.filter((i) => i.score);
  let sortColumn = 2, ascending = true;     // worst (lowest PSNR) first
  const body = el("tbody", { id: "scores" });
  const headRow = el("tr");
  SCORE_COLUMNS.forEach(([name], index) => {
    headRow.append(el("th", { scope: "col" }, el("button", { class: "sort", "data-column": index, onclick: () => sortBy(index), text: name })));
  });
  function sortBy(index) {
    ascending = index === sortColumn ? !ascending : index !== 6 && index !== 5 ? true : false;
    sortColumn = index;
    fill();
  }
  function fill() {
    const get = SCORE_COLUMNS[sortColumn][1];
    const sorted = [...items].sort((a, b) => {
      const x = get(a), y = get(b);
      if (x === null || x === undefined) return 1;
      if (y === null || y === undefined) return -1;
      return (x < y ? -1 : x > y ? 1 : 0) * (ascending ? 1 : -1);
    });
    body.replaceChildren(...sorted.map((item) => el("tr", { "data-id": item.id, class: item.problems.length ? "flagged" : null },
      ...SCORE_COLUMNS.map(([name, value, digits], index) => index === 0
        ? el("td", {}, el("a", { href: "#item=" + encodeURIComponent(item.id), text: item.id }))
        : el("td", { class: digits === null ? null : "num", text: digits === null ? value(item) : fixed(value(item), digits) + (index === 6 && value(item) ? "x" : "") + (index === 5 && item.score.extrapolated ? " *" : "") })))));
    for (const button of headRow.querySelectorAll("button")) {
      const index = Number(button.dataset.column);
      button.parentElement.setAttribute("aria-sort", index === sortColumn ? (ascending ? "ascending" : "descending") : "none");
    }
  }
  const splits = model.scores.splits || {};
  const summary = el("table", { class: "summary" }, el("thead", {}, el("tr", {}, ...["split", "items", "PSNR dB", "SSIM", "rel. MSE", "equal-quality spp", "speedup"].map((h) => el("th", { text: h })))),
    el("tbody", {}, ...Object.entries(splits).map(([name, row]) => el("tr", {}, el("td", { text: name }), el("td", { class: "num", text: row.items }),
      el("td", { class: "num", text: fixed(row.psnr_db, 2) }), el("td", { class: "num", text: fixed(row.ssim, 4) }),
      el("td", { class: "num", text: fixed(row.relative_mse, 5) }), el("td", { class: "num", text: fixed(row.equal_quality_spp, 1) }),
      el("td", { class: "num", text: row.speedup ? fixed(row.speedup, 1, "x") : "n/a" })))));
  put(section, el("div", { class: "score-top" }, el("div", {}, el("h2", { text: "Per split" }), summary,
      el("p", { class: "dim", text: `PSNR and SSIM on the display-referred image at exposure ${fixed(model.scores.exposure, 1)} stops` + (model.scores.covered_only ? ", covered pixels only" : "") + "; * extrapolated beyond the ladder." })),
    el("figure", {}, ladderPlot(items), el("figcaption", { class: "dim", text: "PSNR of each item's plain renders against spp (thin lines), their mean (thick), and each candidate at its equal-quality spp (dots)." }))),
    el("h2", { text: "Per item (click a header to sort; worst first)" }), el("table", { class: "items scores" }, el("thead", {}, headRow), body));
  fill();
}

function ladderPlot(items) {
  const ns = "http://www.w3.org/2000/svg", width = 520, height = 300, pad = { l: 48, r: 14, t: 12, b: 36 };
  const svg = document.createElementNS(ns, "svg");
  svg.setAttribute("viewBox", `0 0 ${width} ${height}`);
  svg.setAttribute("id", "psnr-plot");
  svg.setAttribute("role", "img");
  svg.setAttribute("aria-label", "PSNR against spp");
  const add = (tag, attributes, text) => {
    const node = document.createElementNS(ns, tag);
    for (const [k, v] of Object.entries(attributes)) node.setAttribute(k, v);
    if (text !== undefined) node.textContent = text;
    svg.append(node);
    return node;
  };
  const points = items.flatMap((i) => i.score.ladder), dots = items.filter((i) => i.score.equal_quality_spp).map((i) => [i.score.equal_quality_spp, i.score.psnr_db]);
  const all = points.concat(dots);
  if (!all.length) { add("text", { x: 20, y: 40, class: "axis" }, "no ladder: the items have fewer than two inputs"); return svg; }
  const xs = all.map((p) => Math.log2(p[0])), ys = all.map((p) => p[1]);
  const x0 = Math.floor(Math.min(...xs)), x1 = Math.max(x0 + 1, Math.ceil(Math.max(...xs)));
  const y0 = Math.floor(Math.min(...ys) / 2) * 2, y1 = Math.max(y0 + 2, Math.ceil(Math.max(...ys) / 2) * 2);
  const X = (spp) => pad.l + (Math.log2(spp) - x0) / (x1 - x0) * (width - pad.l - pad.r);
  const Y = (db) => height - pad.b - (db - y0) / (y1 - y0) * (height - pad.t - pad.b);
  for (let e = x0; e <= x1; e++) {
    add("line", { x1: X(2 ** e), x2: X(2 ** e), y1: pad.t, y2: height - pad.b, class: "grid" });
    add("text", { x: X(2 ** e), y: height - pad.b + 16, "text-anchor": "middle", class: "axis" }, String(2 ** e));
  }
  const yStep = Math.max(2, Math.ceil((y1 - y0) / 6 / 2) * 2);
  for (let db = y0; db <= y1; db += yStep) {
    add("line", { x1: pad.l, x2: width - pad.r, y1: Y(db), y2: Y(db), class: "grid" });
    add("text", { x: pad.l - 6, y: Y(db) + 4, "text-anchor": "end", class: "axis" }, String(db));
  }
  add("text", { x: (width + pad.l) / 2, y: height - 4, "text-anchor": "middle", class: "axis" }, "spp (log scale)");
  add("text", { x: 12, y: pad.t + 8, class: "axis" }, "dB");
  const mean = new Map();
  for (const item of items) {
    const ladder = [...item.score.ladder].sort((a, b) => a[0] - b[0]);
    if (ladder.length > 1) add("polyline", { points: ladder.map(([s, d]) => `${X(s)},${Y(d)}`).join(" "), class: "ladder" });
    for (const [s, d] of ladder) { const m = mean.get(s) || [0, 0]; mean.set(s, [m[0] + d, m[1] + 1]); }
  }
  const meanPoints = [...mean.entries()].sort((a, b) => a[0] - b[0]).map(([s, [sum, n]]) => `${X(s)},${Y(sum / n)}`);
  if (meanPoints.length > 1) add("polyline", { points: meanPoints.join(" "), class: "ladder-mean" });
  for (const [s, d] of dots) add("circle", { cx: X(s), cy: Y(d), r: 3.2, class: "candidate" });
  return svg;
}

async function itemView(section, item) {
  const model = report.model, files = item.files.filter((f) => f.status !== "missing" && f.keys);
  const reference = files.find((f) => f.role === "reference"), candidate = files.find((f) => f.role === "candidate");
  const inputs = files.filter((f) => f.role === "input");
  const position = model.items.indexOf(item);
  const options = (chosen) => files.map((f) => el("option", { value: f.bundle, text: f.label + (f.status !== "ok" ? " (" + f.status + ")" : ""), selected: f === chosen }));
  const leftDefault = candidate || inputs[0] || files[0], rightDefault = reference || files[files.length - 1];
  const leftSelect = el("select", { id: "compare-left", "aria-label": "left of the divider" }, ...options(leftDefault));
  const rightSelect = el("select", { id: "compare-right", "aria-label": "right of the divider" }, ...options(rightDefault));
  const divider = el("input", { id: "divider", type: "range", min: "0", max: "100", step: "1", value: "50", "aria-label": "divider position, percent" });
  const canvas = el("canvas", { id: "compare", class: "pixels", tabindex: "0", "aria-label": "compare view" });
  const line = el("div", { class: "divider-line", "aria-hidden": "true" });
  const stage = el("div", { class: "compare-stage" }, canvas, line);
  const readout = el("div", { id: "readout", class: "panel" }, el("p", { class: "dim", text: "Hover the image to read its buffers." }));
  const features = el("div", { class: "features", id: "features" });
  const facts = el("dl", { class: "facts" });
  for (const [name, value] of [["split", item.split], ["volume", item.volume], ["transfer function", item.transfer_function],
    ["reference", item.certified ? `certified, ${item.reference_spp} spp` : item.certified === false ? `missed its target, ${item.reference_spp} spp` : "n/a"],
    ["residual error", fixed(item.residual_error, 4)], ["vs converged", fixed(item.psnr_vs_converged_db, 1, " dB")],
    ...(item.score ? [["PSNR", fixed(item.score.psnr_db, 2, " dB")], ["SSIM", fixed(item.score.ssim, 4)], ["equal-quality spp", fixed(item.score.equal_quality_spp, 1)]] : [])]) {
    facts.append(el("dt", { text: name }), el("dd", { text: String(value) }));
  }
  let flip = null;       // null: split at the divider; "left" or "right": that image whole
  const mode = el("span", { id: "compare-mode", class: "dim" });
  put(section, 
    el("p", { class: "crumbs" }, el("a", { href: report.kind === "score" ? "#scores" : "#items", text: "all items" }),
      ` · item ${position + 1} of ${model.items.length} · `, el("strong", { text: item.id })),
    item.problems.length ? el("p", { class: "alert", text: "Flagged: " + item.problems.join("; ") }) : null,
    el("div", { class: "compare-bar" }, el("label", {}, "left ", leftSelect), el("label", {}, "divider ", divider), el("label", {}, "right ", rightSelect), mode),
    el("p", { class: "hint", text: "drag on the image or use the divider; f: flip between the two whole images; s: back to split; [ ]: move the divider; j / k: next / previous item; Esc: all items; with the image focused (Tab), arrow keys move the read-out" }),
    el("div", { class: "split" }, el("div", { class: "stage" }, el("div", { class: "scroll" }, stage), el("h2", { text: "Feature buffers of the reference" }), features),
      el("aside", {}, el("h2", { text: "Pixel" }), readout, el("h2", { text: "Item" }), facts)));
  if (!files.length) { put(section, el("p", { class: "alert", text: "No readable file for this item." })); return; }
  const [images] = [await Promise.all(files.map((f) => loadBundle(f.bundle)))];
  const byBundle = new Map(files.map((f, k) => [f.bundle, images[k]]));
  const referenceImage = reference ? byBundle.get(reference.bundle) : null;
  const featureKeys = referenceImage ? Object.keys(referenceImage.buffers).filter((k) => k !== "radiance") : [];
  if (!featureKeys.length) features.append(el("p", { class: "dim", text: reference ? "Not in this report (written with --no-features)." : "No readable reference." }));
  const featureCanvases = featureKeys.map((key) => {
    const c = el("canvas", { class: "pixels", "data-key": key, title: key + ": " + KIND_NOTE[bufferKind(key)] });
    c.addEventListener("mousemove", (event) => { const p = pixelUnder(event, c); if (p) inspect(...p); });
    features.append(el("figure", {}, c, el("figcaption", { text: key })));
    return [key, c];
  });
  function column() { return Math.round(Number(divider.value) / 100 * byBundle.get(leftSelect.value).width); }
  function draw() {
    const left = byBundle.get(leftSelect.value), right = byBundle.get(rightSelect.value);
    const split = flip === "left" ? left.width : flip === "right" ? 0 : column();
    drawCompare(canvas, left, right, "radiance", split);
    line.hidden = flip !== null;
    line.style.left = split * view.zoom + "px";
    mode.textContent = flip ? `showing ${flip === "left" ? "left" : "right"}: ${files.find((f) => f.bundle === (flip === "left" ? leftSelect.value : rightSelect.value)).label}` : "";
    for (const [key, c] of featureCanvases) drawBuffer(c, referenceImage, key);
  }
  function inspect(x, y) {
    const rows = [];
    for (const f of files) rows.push([f.label + " radiance", f.bundle, valuesAt(byBundle.get(f.bundle), "radiance", x, y), ""]);
    for (const key of featureKeys) rows.push([key, "reference-" + key, valuesAt(referenceImage, key, x, y), ""]);
    readout.replaceChildren(el("p", { id: "readout-pixel", text: `pixel x ${x}, y ${y}` }), readoutTable(rows));
  }
  let dragging = false;
  canvas.addEventListener("pointerdown", (event) => { dragging = true; canvas.setPointerCapture(event.pointerId); moveDivider(event); });
  canvas.addEventListener("pointerup", () => { dragging = false; });
  const cursor = [0, 0];
  canvas.addEventListener("mousemove", (event) => { const p = pixelUnder(event, canvas); if (p) { cursor.splice(0, 2, ...p); inspect(...p); } });
  canvas.addEventListener("pointermove", (event) => { if (dragging) moveDivider(event); });
  function moveDivider(event) {
    const box = canvas.getBoundingClientRect();
    divider.value = String(Math.round(Math.min(1, Math.max(0, (event.clientX - box.left) / box.width)) * 100));
    flip = null;
    draw();
  }
  for (const control of [leftSelect, rightSelect]) control.addEventListener("change", draw);
  divider.addEventListener("input", () => { flip = null; draw(); });
  keyHandler = (event) => {
    if (arrowInspect(event, canvas, cursor, inspect)) return true;
    if (event.key === "f") { flip = flip === "left" ? "right" : "left"; draw(); return true; }
    if (event.key === "s") { flip = null; draw(); return true; }
    if (event.key === "[" || event.key === "]") { divider.value = String(Number(divider.value) + (event.key === "]" ? 5 : -5)); flip = null; draw(); return true; }
    if (event.key === "j" || event.key === "k") {
      const next = model.items[(position + (event.key === "j" ? 1 : model.items.length - 1)) % model.items.length];
      location.hash = "#item=" + encodeURIComponent(next.id);
      return true;
    }
    if (event.key === "Escape") { location.hash = report.kind === "score" ? "#scores" : "#items"; return true; }
    return false;
  };
  const first = byBundle.get(leftSelect.value);
  if (!view.zoomChosen) { view.zoom = fitZoom(first.width); document.getElementById("zoom").value = String(view.zoom); }
  redrawers.add(draw);
  draw();
}

// --- routing ---------------------------------------------------------------------------------

async function route() {
  const main = document.getElementById("main"), hash = decodeURIComponent(location.hash.slice(1));
  redrawers.clear();
  keyHandler = null;
  const tabs = document.getElementById("tabs");
  const section = el("section", { id: "section" });
  main.replaceChildren(section);
  let current = hash.startsWith("item=") ? "items" : hash || (report.kind === "score" ? "scores" : "items");
  for (const link of tabs.querySelectorAll("a")) link.setAttribute("aria-current", String(link.dataset.tab === current));
  if (hash.startsWith("item=")) {
    const item = report.model.items.find((i) => i.id === hash.slice(5));
    if (!item) { put(section, el("p", { class: "alert", text: "No item " + hash.slice(5) + " in this report." })); return; }
    document.getElementById("controls").hidden = false;
    await itemView(section, item);
  } else if (current === "scores" && report.kind === "score") {
    document.getElementById("controls").hidden = true;
    scoreSection(section);
  } else {
    document.getElementById("controls").hidden = true;
    datasetTable(section);
  }
}

async function start() {
  const model = report.model;
  if (!model) { document.getElementById("main").textContent = "data/report.js is missing: this folder is not a whole report."; return; }
  document.getElementById("kind").textContent = report.kind;
  document.getElementById("foot").textContent = `written by tracer ${model.version} from ${model.source} · float buffers are shipped as half floats `
    + "(11 significant bits; magnitudes above 65504 show as inf) · images are shown with nearest-neighbour zoom";
  if (model.medical) {
    const caution = document.getElementById("caution");
    caution.hidden = false;
    caution.textContent = "Renders of medical scans are for research and teaching, not diagnosis; transfer functions can hide or invent structure. Defer to licensed clinical practice.";
  }
  setupControls();
  document.getElementById("zoom").addEventListener("change", () => { view.zoomChosen = true; });
  if (report.kind === "render") {
    await renderPage(document.getElementById("main"));
  } else {
    const tabs = document.getElementById("tabs");
    if (report.kind === "score") tabs.append(el("a", { href: "#scores", "data-tab": "scores", text: "scores" }));
    tabs.append(el("a", { href: "#items", "data-tab": "items", text: "items" }));
    window.addEventListener("hashchange", () => { route().then(ready); });
    await route();
  }
  ready();
}

function ready() { document.documentElement.dataset.ready = String(Number(document.documentElement.dataset.ready || 0) + 1); }

window.addEventListener("DOMContentLoaded", () => {
  start().catch((error) => {
    document.getElementById("main").append(el("p", { class: "alert", text: String(error.message || error) }));
    ready();
  });
});

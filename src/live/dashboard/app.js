// plumbline dashboard: reads /api/snapshot once, then follows /api/stream (server-sent
// events, one `snapshot` event per snapshot) and redraws. Plain DOM and SVG, no libraries,
// nothing fetched from elsewhere. Text is set with textContent only.
"use strict";

const COLOURS = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9"];
const DASHES = ["", "7 4", "2 3", "9 3 2 3", "4 2", "1 2"];
const SVG = "http://www.w3.org/2000/svg";
const H = 230, ML = 62, MR = 12, MT = 10, MB = 38;

function el(tag, attrs, text) {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, v);
  if (text !== undefined) e.textContent = text;
  return e;
}
function sv(tag, attrs, text) {
  const e = document.createElementNS(SVG, tag);
  for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, v);
  if (text !== undefined) e.textContent = text;
  return e;
}

// A number with three or four significant digits and never in exponent form, which is
// easy to misread at a glance; magnitudes under 1e-4 read as 0.0000 (-0.0000 below zero,
// so a value just under a threshold of 0 reads as under it), counts as integers.
function fmtNum(v, unit) {
  if (v === null || v === undefined || !isFinite(v)) return "–";
  const a = Math.abs(v);
  let s;
  if (a === 0 || (unit === "objects" && Number.isInteger(v))) s = String(v);
  else if (a >= 1000) s = v.toFixed(0);
  else if (a >= 100) s = v.toFixed(1);
  else if (a >= 10) s = v.toFixed(2);
  else if (a >= 0.01) s = v.toFixed(3);
  else s = v.toFixed(4);
  return s;
}
function fmt(v, unit) {
  const s = fmtNum(v, unit);
  return unit && s !== "–" ? s + " " + unit : s;
}

// Charts in seconds whose values are all under a second read better in milliseconds.
function displayUnit(c) {
  if (c.unit !== "s") return { unit: c.unit, k: 1 };
  const all = c.lines.flatMap((l) => l.values).filter((v) => v !== null);
  return all.every((v) => Math.abs(v) < 1) ? { unit: "ms", k: 1000 } : { unit: "s", k: 1 };
}

// Event times: Unix seconds read as UTC time of day; simulation seconds as they are.
function fmtTime(t) {
  if (t > 1e9) return new Date(t * 1000).toISOString().slice(11, 23) + " UTC";
  return "t = " + t.toFixed(3) + " s";
}

function fmtAge(s) {
  if (s === null || s === undefined) return "";
  if (s < 60) return s.toFixed(1) + " s";
  return Math.floor(s / 60) + " min " + Math.round(s % 60) + " s";
}

function niceStep(range, n) {
  const raw = range / n;
  const mag = Math.pow(10, Math.floor(Math.log10(raw)));
  const f = raw / mag;
  return (f < 1.5 ? 1 : f < 3.5 ? 2 : f < 7.5 ? 5 : 10) * mag;
}

function tickLabel(v, step) {
  const d = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
  return v.toFixed(Math.min(d, 6));
}

// === charts ===

const chartEls = {};

function ensureChart(c) {
  if (chartEls[c.id]) return chartEls[c.id];
  const box = el("div", { class: "chart", id: "chart-" + c.id });
  const h = el("h3", {}, c.title);
  const legend = el("div", { class: "legend" });
  const svg = sv("svg", { role: "img", "aria-label": c.title });
  box.append(h, legend, svg);
  document.getElementById("charts").append(box);
  chartEls[c.id] = { box, legend, svg };
  return chartEls[c.id];
}

function drawChart(c, times, now, history) {
  const { box, legend, svg } = ensureChart(c);
  // One SVG unit a CSS pixel, so text keeps its size in a narrow window.
  const W = Math.max(300, Math.round(svg.parentElement.clientWidth - 20));
  svg.setAttribute("viewBox", `0 0 ${W} ${H}`);
  const { unit, k: scale } = displayUnit(c);
  let lo = Infinity, hi = -Infinity, points = 0;
  for (const l of c.lines) for (const v of l.values) if (v !== null) { lo = Math.min(lo, v * scale); hi = Math.max(hi, v * scale); points++; }
  box.dataset.rows = String(times.length);
  box.dataset.points = String(points);
  legend.replaceChildren();
  c.lines.forEach((l, i) => {
    let cur = null;
    for (let k = l.values.length - 1; k >= 0; k--) if (l.values[k] !== null) { cur = l.values[k]; break; }
    const item = el("span", {});
    const sw = el("span", { class: "sw" });
    sw.style.borderTopStyle = DASHES[i % DASHES.length] ? "dashed" : "solid";
    sw.style.borderTopColor = COLOURS[i % COLOURS.length];
    item.append(sw, document.createTextNode(l.label));
    item.append(el("span", { class: "cur" }, fmt(cur === null ? null : cur * scale, unit)));
    legend.append(item);
  });
  svg.replaceChildren();
  const pw = W - ML - MR, ph = H - MT - MB;
  const x = (t) => ML + pw * (1 + (t - now) / history);
  // x axis: seconds before now.
  const ax = sv("g", { class: "axis" });
  const grid = sv("g", { class: "grid" });
  for (let s = 0; s <= history + 1e-9; s += history / 4) {
    const px = ML + pw * (1 - s / history);
    grid.append(sv("line", { x1: px, x2: px, y1: MT, y2: MT + ph }));
    ax.append(sv("text", { x: px, y: MT + ph + 16, "text-anchor": "middle" }, s === 0 ? "now" : "-" + s.toFixed(0)));
  }
  ax.append(sv("text", { x: ML + pw / 2, y: H - 4, "text-anchor": "middle" }, "time before now (s)"));
  ax.append(sv("line", { x1: ML, x2: ML + pw, y1: MT + ph, y2: MT + ph }));
  ax.append(sv("line", { x1: ML, x2: ML, y1: MT, y2: MT + ph }));
  svg.append(grid, ax);
  if (points === 0) {
    svg.append(sv("text", { class: "nodata", x: ML + pw / 2, y: MT + ph / 2, "text-anchor": "middle" }, "no data yet"));
    return;
  }
  if (lo > 0 && lo < hi * 0.5) lo = 0;
  if (hi === lo) { const pad = Math.abs(hi) * 0.1 || 0.1; lo -= pad; hi += pad; }
  const step = niceStep(hi - lo, 4);
  lo = Math.floor(lo / step) * step;
  hi = Math.ceil(hi / step) * step;
  const y = (v) => MT + ph * (1 - (v - lo) / (hi - lo));
  for (let v = lo; v <= hi + step * 1e-6; v += step) {
    grid.append(sv("line", { x1: ML, x2: ML + pw, y1: y(v), y2: y(v) }));
    ax.append(sv("text", { x: ML - 6, y: y(v) + 4, "text-anchor": "end" }, tickLabel(v, step)));
  }
  ax.append(sv("text", { x: 14, y: MT + ph / 2, "text-anchor": "middle", transform: `rotate(-90 14 ${MT + ph / 2})` }, unit));
  c.lines.forEach((l, i) => {
    let d = "", pen = false;
    l.values.forEach((v, k) => {
      if (v === null || times[k] < now - history) { pen = false; return; }
      d += (pen ? "L" : "M") + x(times[k]).toFixed(1) + " " + y(v * scale).toFixed(1);
      pen = true;
    });
    if (!d) return;
    svg.append(sv("path", {
      d, fill: "none", stroke: COLOURS[i % COLOURS.length], "stroke-width": 2.5,
      "stroke-dasharray": DASHES[i % DASHES.length], "stroke-linejoin": "round",
      "data-line": l.label,
    }));
  });
}

// === panels ===

function drawTiles(tiles) {
  const box = document.getElementById("tiles");
  box.replaceChildren();
  for (const t of tiles) {
    const d = el("div", { class: "tile", "data-metric": t.metric, "data-state": t.state });
    d.append(el("div", { class: "label" }, t.label));
    const v = el("div", { class: "value" });
    if (t.state === "no_data") v.textContent = "no data yet";
    else { v.textContent = fmtNum(t.value, t.unit); v.append(el("span", { class: "unit" }, t.unit)); }
    d.append(v);
    let age = "";
    if (t.state === "stale") age = "STALE: last value " + fmtAge(t.age_s) + " ago";
    else if (t.state === "ok") age = "updated " + fmtAge(t.age_s) + " ago";
    d.append(el("div", { class: "age" }, age));
    box.append(d);
  }
}

function drawAlerts(active) {
  const ul = document.getElementById("alerts-active");
  ul.replaceChildren();
  if (active.length === 0) { ul.append(el("li", { class: "none" }, "no rule raised")); return; }
  for (const a of active) {
    const li = el("li", { class: "sev-" + a.severity + (a.stale ? " stale" : ""), "data-rule": a.rule,
      "data-raised-t": String(a.raised_t), "data-stale": String(a.stale) });
    li.append(el("span", { class: "sev" }, a.severity));
    li.append(el("span", { class: "rule" }, a.rule + (a.role ? " [" + a.role + "]" : "")));
    li.append(el("span", { class: "when" }, "raised at " + fmtTime(a.raised_t)));
    li.append(el("span", { class: "for" }, "active for " + fmtAge(a.active_s)));
    li.append(el("span", {}, a.metric + " " + fmt(a.value) + " vs threshold " + fmt(a.threshold)));
    if (a.stale) li.append(el("span", { class: "stale-note" }, "STALE: no new " + a.metric + " value; this is the last known state"));
    ul.append(li);
  }
}

function drawEvents(recent) {
  const ul = document.getElementById("alerts-recent");
  ul.replaceChildren();
  if (recent.length === 0) { ul.append(el("li", { class: "none" }, "none yet")); return; }
  for (const e of recent) {
    const li = el("li", { "data-rule": e.rule, "data-kind": e.kind, "data-t": String(e.t) });
    li.append(el("span", { class: "kind-" + e.kind }, e.kind + " "));
    li.append(document.createTextNode(e.rule + " (" + e.severity + ") at " + fmtTime(e.t) + ": " +
      e.stat + " of " + e.metric + " = " + fmt(e.value) + ", threshold " + fmt(e.threshold)));
    ul.append(li);
  }
}

// Each cell carries its column's name, shown beside it when a narrow window stacks the rows.
function labelCells(tr, table) {
  const names = [...document.querySelectorAll(table + " thead th")].map((th) => th.textContent);
  [...tr.children].forEach((td, i) => td.setAttribute("data-label", names[i] || ""));
  return tr;
}
function cell(text, cls) { return el("td", cls ? { class: cls } : {}, text); }
function badge(text, cls) { const td = el("td"); td.append(el("span", { class: cls }, text.replace("_", " "))); return td; }

function drawTopics(topics) {
  const tb = document.querySelector("#topics tbody");
  tb.replaceChildren();
  for (const t of topics) {
    const tr = el("tr", { "data-role": t.role, "data-state": t.state });
    const ms = (v) => (v === null ? "–" : fmt(v * 1000));
    tr.append(cell(t.role), badge(t.state, "state state-" + t.state), cell(fmt(t.rate_hz), "n"),
      cell(ms(t.latency_p50_s), "n"), cell(ms(t.latency_p99_s), "n"), cell(fmt(t.staleness_s), "n"),
      cell(String(t.dropped), "n"), cell(String(t.rejected), "n"), cell(String(t.stamp_regressions), "n"),
      cell(t.publishers === null ? "–" : String(t.publishers), "n"));
    tb.append(labelCells(tr, "#topics"));
  }
}

function drawVerdicts(verdicts) {
  const tb = document.querySelector("#verdicts tbody");
  tb.replaceChildren();
  if (verdicts.length === 0) {
    const tr = el("tr", { class: "none" });
    tr.append(el("td", { colspan: "6" }, "no rules in the config (see [[rule]] in the README)"));
    tb.append(tr);
    return;
  }
  for (const v of verdicts) {
    const tr = el("tr", { "data-rule": v.rule, "data-verdict": v.verdict });
    tr.append(cell(v.rule), badge(v.verdict, "verdict-" + v.verdict), cell(v.severity),
      cell(fmt(v.worst), "n"), cell((v.direction === "above" ? "> " : "< ") + fmt(v.threshold), "n"),
      cell(String(v.raised), "n"));
    tb.append(labelCells(tr, "#verdicts"));
  }
}

let last = null;

// What the header says once the stream is up: the state of the input, not of the socket.
const INPUT_STATES = {
  live: ["live", "streaming"],
  stale: ["stale", "INPUT STALE: every role has gone quiet"],
  merged: ["merged", "several publishers on one role: their messages merge"],
  no_data: ["connecting", "waiting for input"],
};

function render(s) {
  if (!s || !s.charts) return;
  last = s;
  if (streaming && INPUT_STATES[s.input]) setLink(...INPUT_STATES[s.input]);
  document.getElementById("clock").textContent = isFinite(s.now) ? fmtTime(s.now) : "–";
  document.getElementById("steps-tracking").textContent = String(s.steps.tracking_evaluated);
  document.getElementById("steps-ego").textContent = String(s.steps.ego_evaluated);
  document.getElementById("collisions").textContent = String(s.collisions);
  drawAlerts(s.alerts_active);
  drawTiles(s.tiles);
  for (const c of s.charts) drawChart(c, s.row_times, s.now, s.history_s);
  drawTopics(s.topics);
  drawVerdicts(s.verdicts);
  drawEvents(s.alerts_recent);
  document.body.dataset.snapshots = String((+document.body.dataset.snapshots || 0) + 1);
}

let streaming = false;

function setLink(state, text) {
  const l = document.getElementById("link");
  l.dataset.state = state;
  l.textContent = text;
}

// === the stream ===
// Read with fetch rather than EventSource so that a bearer token (when the monitor has
// `http.token_file`) can go in the Authorization header. The token stays in this tab's
// sessionStorage.

const sleep = (ms) => new Promise((r) => setTimeout(r, ms));

function headers() {
  const t = sessionStorage.getItem("plumbline-token");
  return t ? { Authorization: "Bearer " + t } : {};
}

function askToken() {
  setLink("lost", "token needed");
  const form = document.getElementById("token-form");
  form.hidden = false;
  return new Promise((resolve) => {
    form.onsubmit = (ev) => {
      ev.preventDefault();
      sessionStorage.setItem("plumbline-token", document.getElementById("token").value.trim());
      form.hidden = true;
      resolve();
    };
  });
}

// One server-sent event block: `event:` and `data:` lines (comments start with ':').
function handleEvent(block) {
  let name = "message";
  const data = [];
  for (const line of block.split("\n")) {
    if (line.startsWith("event:")) name = line.slice(6).trim();
    else if (line.startsWith("data:")) data.push(line.slice(5).replace(/^ /, ""));
  }
  if (name !== "snapshot" || data.length === 0) return;
  try { render(JSON.parse(data.join("\n"))); } catch (e) { /* a torn event: the next one redraws */ }
}

async function follow() {
  for (;;) {
    try {
      const r = await fetch("api/stream", { headers: headers(), cache: "no-store" });
      if (r.status === 401) { await askToken(); continue; }
      if (!r.ok) throw new Error("HTTP " + r.status);
      setLink("live", "streaming");
      streaming = true;
      const reader = r.body.getReader();
      const dec = new TextDecoder();
      let buf = "";
      for (;;) {
        const { value, done } = await reader.read();
        if (done) break;
        buf += dec.decode(value, { stream: true }).replace(/\r\n/g, "\n");
        let i;
        while ((i = buf.indexOf("\n\n")) >= 0) {
          handleEvent(buf.slice(0, i));
          buf = buf.slice(i + 2);
        }
      }
    } catch (e) { /* fall through: retry */ }
    streaming = false;
    setLink("lost", "connection lost: retrying");
    await sleep(1000);
  }
}

fetch("api/snapshot", { headers: headers(), cache: "no-store" })
  .then((r) => (r.ok ? r.json() : null)).then(render).catch(() => {});
follow();

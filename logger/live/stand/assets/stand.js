// The stand page: shows the state object that saglog pushes (Server-Sent Events at /events).
// Lengths arrive in millimetres, as in the run's files; they are shown in the profile's unit.
"use strict";

const MM_PER_IN = 25.4;  // exactly
const WATCHDOG_MS = 12000;  // the server pings every 5 s: this much silence means the link is gone
const key = new URLSearchParams(location.search).get("key");
const query = key ? "?key=" + encodeURIComponent(key) : "";
const $ = (id) => document.getElementById(id);
let source = null;
let lastHeard = 0;
let runOver = false;

function length(mm, unit, digits) {
  // as the terminal shows lengths: one more decimal in inches
  if (mm === null || mm === undefined) return "\u2013";
  const d = unit === "in" ? digits + 1 : digits;
  return (unit === "in" ? mm / MM_PER_IN : mm).toFixed(d);
}

function setText(id, text) {
  const el = $(id);
  if (el.textContent !== text) el.textContent = text;
}

function showResult(s, unit) {
  const radius = length(s.radius_mm, unit, 1);
  setText("radius", radius);
  $("radius").style.setProperty("--chars", String(Math.max(radius.length, 4)));
  setText("radius-unit", s.radius_mm == null ? "" : unit);
  setText("radius-u", s.radius_U_mm == null ? (s.radius_mm == null ? "" : "uncertainty not yet known")
    : "\u00b1 " + length(s.radius_U_mm, unit, 1) + " " + unit + " (95 %)");
  setText("focal", s.focal_length_mm == null ? "\u2013" : length(s.focal_length_mm, unit, 1) + " " + unit);
  setText("ratio", s.focal_ratio == null ? "\u2013" : "f/" + s.focal_ratio.toFixed(2));
  const target = s.target_radius_mm;
  // once ground beyond the target the captions say so and the distances lose their sign, as in the terminal
  const past = s.radius_to_go_mm != null && s.radius_to_go_mm < 0;
  const away = (mm, digits) => mm == null ? "\u2013" : length(Math.abs(mm), unit, digits) + " " + unit;
  setText("togo-caption", target == null ? "radius still to go (no target)"
    : (past ? "radius past the target of " : "radius still to go to ") + length(target, unit, 1) + " " + unit);
  setText("togo-sagitta-caption", past ? "sagitta past the target" : "sagitta still to go");
  setText("togo-depth-caption",
    past ? "depth ground past the target at the centre" : "depth still to grind at the centre");
  setText("togo-radius", away(s.radius_to_go_mm, 1));
  setText("togo-sagitta", away(s.sagitta_to_go_mm, 4));
  setText("togo-depth", s.depth_to_go_mm == null ? "\u2013" : length(Math.abs(s.depth_to_go_mm), unit, 4)
    + " \u00b1 " + length(s.depth_to_go_U_mm, unit, 4) + " " + unit);
}

function show(s) {
  const unit = s.unit === "in" ? "in" : "mm";
  const main = $("stand");
  runOver = Boolean(s.run_over);
  main.dataset.state = s.state;
  setText("state", s.state);
  setText("reading", s.reading_mm == null ? "" : length(s.reading_mm, unit, 3) + " " + unit);
  showResult(s, unit);
  setText("n-flat", String(s.seatings_flat ?? 0));
  setText("n-surface", String(s.seatings_surface ?? 0));
  setText("n-rejected", String(s.seatings_rejected ?? 0));
  const last = s.last_seating;
  $("verdict").dataset.accepted = last ? (last.accepted ? "yes" : "no") : "none";
  setText("verdict-text", last ? last.text : "no seating yet");
  setText("message", s.message || "");
  plot(s.surface_seatings, unit);
}

let plotted = [null, "mm"];

function plot(series, unit) {
  // drawn in the box's own pixels, so dots stay round and labels stay legible at any size
  plotted = [series, unit];
  const svg = $("plot-svg");
  const ns = "http://www.w3.org/2000/svg";
  while (svg.firstChild) svg.removeChild(svg.firstChild);
  const W = Math.max(svg.clientWidth, 120), H = Math.max(svg.clientHeight, 60);
  svg.setAttribute("viewBox", `0 0 ${W} ${H}`);
  if (!series || series.radius_mm.length === 0) return;
  const scale = unit === "in" ? 1 / MM_PER_IN : 1;
  const all = [...series.radius_mm, ...series.low_mm, ...series.high_mm].filter((v) => v !== null);
  let lo = Math.min(...all) * scale, hi = Math.max(...all) * scale;
  if (hi - lo < 1e-9) { lo -= 1; hi += 1; }
  const pad = (hi - lo) * 0.08;
  lo -= pad; hi += pad;
  const n = series.radius_mm.length, left = 56, right = 10;
  const x = (i) => n === 1 ? (left + W - right) / 2 : left + (i * (W - left - right)) / (n - 1);
  const y = (mm) => H - 8 - ((mm * scale - lo) * (H - 16)) / (hi - lo);
  const el = (name, attrs) => {
    const e = document.createElementNS(ns, name);
    for (const [k, v] of Object.entries(attrs)) e.setAttribute(k, v);
    svg.appendChild(e);
    return e;
  };
  const banded = series.low_mm.map((v, i) => (v === null ? null : i)).filter((i) => i !== null);
  if (banded.length > 1) {
    const upper = banded.map((i) => `${x(i)},${y(series.high_mm[i])}`);
    const lower = banded.reverse().map((i) => `${x(i)},${y(series.low_mm[i])}`);
    el("polygon", { class: "plot-band", points: [...upper, ...lower].join(" ") });
  }
  el("polyline", { class: "plot-mean", points: series.mean_mm.map((v, i) => `${x(i)},${y(v)}`).join(" ") });
  series.radius_mm.forEach((v, i) => el("circle", { class: "plot-point", cx: x(i), cy: y(v), r: 4 }));
  const digits = unit === "in" ? 2 : 1;
  el("text", { class: "plot-label", x: 4, y: 16 }).textContent = hi.toFixed(digits);
  el("text", { class: "plot-label", x: 4, y: H - 6 }).textContent = lo.toFixed(digits);
}

function setLink(up) {
  // after the capture's end the page keeps the final result and says so, instead of "reconnecting"
  $("stand").dataset.link = up ? "up" : (runOver ? "over" : "down");
}

function heard() {
  lastHeard = Date.now();
  setLink(true);
}

function connect() {
  if (source) source.close();
  lastHeard = Date.now();
  source = new EventSource("events" + query);
  source.onmessage = (e) => { heard(); show(JSON.parse(e.data)); };
  source.addEventListener("ping", heard);
  source.onerror = () => {
    setLink(false);
    // the browser retries by itself while it can; when it has given up, start afresh
    if (source.readyState === EventSource.CLOSED) setTimeout(connect, 2000);
  };
}

async function keepAwake() {
  if (!("wakeLock" in navigator)) {
    setText("awake", "This browser cannot keep the screen on here: set the screen timeout longer.");
    return;
  }
  try {
    await navigator.wakeLock.request("screen");
    setText("awake", "");
  } catch (err) {
    setText("awake", "The screen may dim: " + err.message);
  }
}

window.addEventListener("resize", () => plot(...plotted));
document.addEventListener("visibilitychange", () => {
  if (document.visibilityState === "visible") keepAwake();  // the lock is released when the page is hidden
});
setInterval(() => {
  if (Date.now() - lastHeard > WATCHDOG_MS) { setLink(false); connect(); }
}, 3000);
connect();
keepAwake();

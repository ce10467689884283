// sweepgate live view: the events of /events drawn on canvases. No libraries, no network
// beyond this page's own server.
"use strict";

const FLAG_NAMES = [
  [1 << 0, "smeared (sweep travel over half a bin)"],
  [1 << 1, "revisited"],
  [1 << 2, "taken on a reversed pass"],
  [1 << 3, "sparse (few sweeps)"],
  [1 << 4, "taken while moving"],
  [1 << 5, "extrapolated angle"],
  [1 << 6, "combined with an earlier pass"],
  [1 << 7, "gate check: echo inside the gate"],
  [1 << 8, "gate check: direct path outside the gate"],
];
const GATE_FLAGS = (1 << 7) | (1 << 8);
const COLOURS = { raw: "#d98c00", gated: "#1565c0", truth: "#2e7d32", grid: "#dde1e8", text: "#445", flag: "#c62828", cursor: "#7b1fa2" };

const view = {
  meta: { title: "", source: "", frequencies_hz: [], total_bins: null, notes: [] },
  bins: new Map(),
  impulses: new Map(),
  status: null,
  ended: null,
  counters: null,
  truth: null,
  selected: 0,
  cursorDeg: null,
  heldDeg: null,
  records: 0,
  dirty: true,
  firstStatus: null,
  sweepRate: null,
};
// Read by the browser test: how many bins the last drawing of the plots used.
window.sweepgateView = { binsDrawn: 0, draws: 0 };

const $ = (id) => document.getElementById(id);

function db(re, im) {
  if (re === null || im === null) return null;
  const m = Math.hypot(re, im);
  return 20 * Math.log10(Math.max(m, 1e-15));
}
function wrapDeg(a) { return ((a + 180) % 360 + 360) % 360 - 180; }
function fmt(x, d) { return x === null || x === undefined || !isFinite(x) ? "–" : x.toFixed(d); }
function ghz(hz) { return (hz / 1e9).toFixed(3) + " GHz"; }

// An RCS scan (meta.absolute_levels): the bins carry calibrated amplitudes, so their dB are
// absolute (dBsm) and are drawn and read out so; otherwise each trace in dB below its peak.
function absolute() { return view.meta.absolute_levels || null; }
function unit() { const a = absolute(); return a ? a.unit : "dB"; }

// The level scale of the plots: `base(peak)` is the level drawn at the outer ring / top
// line (each trace's own peak, or one top for all traces in absolute levels), `tick(lv)`
// names the level `lv` below it.
function levelScale(P) {
  const a = absolute();
  if (!a) return { base: (peak) => peak, tick: (lv) => lv + " dB", top: 0 };
  const peaks = [P.peakRaw, P.peakGated].filter((x) => isFinite(x));
  const top = peaks.length ? 10 * Math.ceil(Math.max(...peaks) / 10) : 0;
  return { base: () => top, tick: (lv) => (top + lv) + " " + a.unit, top };
}

// ------------------------------------------------------------------ events

function applySnapshot(s) {
  view.meta = s.meta;
  view.bins = new Map();
  for (const b of s.bins) view.bins.set(b.bin, b);
  view.impulses = new Map();
  for (const r of s.impulses || []) view.impulses.set(r.bin, r);
  view.status = s.status;
  view.counters = s.counters;
  view.ended = null;
  fillFrequencies();
  if (s.ended) applyEnd(s.ended);
  view.dirty = true;
}

function applyStatus(st) {
  if (view.firstStatus === null) view.firstStatus = st;
  const f = view.firstStatus;
  if (st.time_us > f.time_us && st.sweeps_pushed >= f.sweeps_pushed) {
    view.sweepRate = (st.sweeps_pushed - f.sweeps_pushed) / ((st.time_us - f.time_us) * 1e-6);
  }
  view.status = st;
}

function connect() {
  const es = new EventSource("/events");
  es.addEventListener("open", () => { $("link-state").textContent = "live"; });
  es.addEventListener("error", () => {
    $("link-state").textContent = view.ended ? "scan ended; server gone" : "reconnecting";
  });
  es.addEventListener("snapshot", (e) => { applySnapshot(JSON.parse(e.data)); });
  es.addEventListener("bin", (e) => {
    const b = JSON.parse(e.data);
    view.bins.set(b.bin, b);
    view.records++;
    view.dirty = true;
  });
  es.addEventListener("impulse", (e) => {
    const r = JSON.parse(e.data);
    view.impulses.set(r.bin, r);
    view.records++;
    view.dirty = true;
  });
  es.addEventListener("status", (e) => { applyStatus(JSON.parse(e.data)); view.records++; view.dirty = true; });
  es.addEventListener("meta", (e) => { view.meta = JSON.parse(e.data); fillFrequencies(); view.dirty = true; });
  es.addEventListener("note", (e) => { view.meta.notes.push(JSON.parse(e.data)); view.dirty = true; });
  es.addEventListener("end", (e) => { applyEnd(JSON.parse(e.data)); view.dirty = true; });
}

function fillFrequencies() {
  const sel = $("frequency");
  const slots = frequencySlots();
  if (sel.options.length === slots.length) return;
  sel.innerHTML = "";
  for (const [slot, name] of slots) {
    const o = document.createElement("option");
    o.value = String(slot);
    o.textContent = name;
    sel.appendChild(o);
  }
  if (slots.length > 0 && !slots.some(([slot]) => slot === view.selected)) view.selected = slots[0][0];
  sel.value = String(view.selected);
}

// The pattern frequencies as [value slot, name]: the set-up's when known, else the first
// record's grid points (padding slots repeat one, shown once), in GHz when the grid is known.
function frequencySlots() {
  if (view.meta.frequencies_hz.length > 0) return view.meta.frequencies_hz.map((f, i) => [i, ghz(f)]);
  const first = view.bins.values().next().value;
  if (!first) return [];
  const m = view.meta;
  const name = (i) => (m.grid_start_hz !== null && m.grid_start_hz !== undefined && m.grid_step_hz
    ? ghz(m.grid_start_hz + i * m.grid_step_hz) : "grid point " + i);
  const seen = new Set();
  const out = [];
  first.values.forEach((v, slot) => {
    if (!seen.has(v.index)) { seen.add(v.index); out.push([slot, name(v.index)]); }
  });
  return out;
}

function frequencyName(slot) {
  const hit = frequencySlots().find(([s]) => s === slot);
  return hit ? hit[1] : "–";
}

// ------------------------------------------------------------------ the pattern

// Points of the shown frequency sorted by angle: {deg, raw, gated, flags} in dB, and each
// trace's peak.
function patternPoints() {
  const pts = [];
  for (const b of view.bins.values()) {
    const v = b.values[view.selected];
    if (!v || b.nominal_deg === null) continue;
    pts.push({ deg: wrapDeg(b.nominal_deg), raw: db(v.raw[0], v.raw[1]), gated: db(v.gated[0], v.gated[1]), flags: b.flags, bin: b.bin });
  }
  pts.sort((a, b) => a.deg - b.deg);
  const peak = (k) => pts.reduce((m, p) => (p[k] !== null && p[k] > m ? p[k] : m), -Infinity);
  return { pts, peakRaw: peak("raw"), peakGated: peak("gated") };
}

function truthPoints() {
  if (!view.truth) return null;
  const f = view.meta.frequencies_hz[view.selected];
  if (f === undefined) return null;
  let best = null;
  for (const k of view.truth.keys()) if (best === null || Math.abs(k - f) < Math.abs(best - f)) best = k;
  if (best === null || Math.abs(best - f) > 1) return null;
  const pts = view.truth.get(best).map(([deg, v]) => ({ deg: wrapDeg(deg), v })).sort((a, b) => a.deg - b.deg);
  const peak = pts.reduce((m, p) => Math.max(m, p.v), -Infinity);
  return { pts, peak };
}

// The peak and the −3 dB points either side of it (linear between bins), of one trace.
function markers(pts, key, peak) {
  if (!isFinite(peak) || pts.length < 3) return null;
  const n = pts.length;
  const i0 = pts.findIndex((p) => p[key] === peak);
  // Neighbours further apart than a few bins (a sector's two ends, a gap) end the walk.
  const gap = 3 * 360 / Math.max(view.meta.total_bins || n, 1);
  const walk = (dir) => {
    for (let s = 1; s < n; s++) {
      const a = pts[(i0 + (s - 1) * dir + n) % n], b = pts[(i0 + s * dir + n) % n];
      if (Math.abs(wrapDeg(b.deg - a.deg)) > Math.max(gap, 1e-9) || a[key] === null) return null;
      if (b[key] !== null && b[key] - peak <= -3) {
        const t = (peak - 3 - a[key]) / (b[key] - a[key]);
        let da = wrapDeg(b.deg - a.deg);
        return wrapDeg(a.deg + t * da);
      }
    }
    return null;
  };
  const left = walk(-1), right = walk(1);
  const width = left !== null && right !== null ? ((right - left) % 360 + 360) % 360 : null;
  return { peakDeg: pts[i0].deg, peakDb: peak, left, right, width };
}

function nearest(pts, deg) {
  let best = null;
  for (const p of pts) if (best === null || Math.abs(wrapDeg(p.deg - deg)) < Math.abs(wrapDeg(best.deg - deg))) best = p;
  return best;
}

// ------------------------------------------------------------------ drawing

function ctxOf(id) {
  const c = $(id);
  const r = window.devicePixelRatio || 1;
  const w = c.clientWidth || c.width, h = c.clientHeight || c.height;
  if (c.width !== Math.round(w * r) || c.height !== Math.round(h * r)) {
    c.width = Math.round(w * r);
    c.height = Math.round(h * r);
  }
  const g = c.getContext("2d");
  g.setTransform(r, 0, 0, r, 0, 0);
  g.clearRect(0, 0, w, h);
  g.font = "12px system-ui, sans-serif";
  return { g, w, h };
}

function shown(key) { return $("show-" + key).checked; }
function rangeDb() { return Number($("range").value); }

function drawPolar(P, T, mk, S) {
  const { g, w, h } = ctxOf("polar");
  const cx = w / 2, cy = h / 2, R = Math.min(w, h) / 2 - 28, range = rangeDb();
  const rad = (lv) => R * Math.max(0, 1 + lv / range);
  const xy = (deg, r) => [cx + r * Math.sin(deg * Math.PI / 180), cy - r * Math.cos(deg * Math.PI / 180)];
  g.strokeStyle = COLOURS.grid; g.fillStyle = COLOURS.text; g.lineWidth = 1;
  for (let lv = 0; lv >= -range; lv -= 10) {
    g.beginPath(); g.arc(cx, cy, rad(lv), 0, 2 * Math.PI); g.stroke();
    g.fillText(S.tick(lv), cx + 3, cy - rad(lv) + 12);
  }
  for (let a = -150; a <= 180; a += 30) {
    const [x, y] = xy(a, R);
    g.beginPath(); g.moveTo(cx, cy); g.lineTo(x, y); g.stroke();
    const [lx, ly] = xy(a, R + 14);
    g.textAlign = "center"; g.fillText(a + "°", lx, ly + 4);
  }
  g.textAlign = "left";
  const trace = (pts, key, peak, colour, dash) => {
    if (!isFinite(peak)) return;
    g.strokeStyle = colour; g.lineWidth = 1.6; g.setLineDash(dash); g.beginPath();
    let started = false;
    for (const p of pts) {
      if (p[key] === null) continue;
      const [x, y] = xy(p.deg, rad(p[key] - S.base(peak)));
      if (started) g.lineTo(x, y); else { g.moveTo(x, y); started = true; }
    }
    if (pts.length === (view.meta.total_bins || -1)) g.closePath();
    g.stroke(); g.setLineDash([]);
  };
  if (shown("raw")) trace(P.pts, "raw", P.peakRaw, COLOURS.raw, []);
  if (shown("gated")) trace(P.pts, "gated", P.peakGated, COLOURS.gated, []);
  if (T && shown("truth")) trace(T.pts, "v", T.peak, COLOURS.truth, [5, 4]);
  const c = cursorDeg();
  if (c !== null) {
    g.strokeStyle = COLOURS.cursor; g.setLineDash([3, 3]);
    const [x, y] = xy(c, R); g.beginPath(); g.moveTo(cx, cy); g.lineTo(x, y); g.stroke(); g.setLineDash([]);
  }
  if (mk) {
    const [x, y] = xy(mk.peakDeg, rad(mk.peakDb - S.base(mk.peakDb)));
    g.fillStyle = COLOURS.gated; g.beginPath(); g.moveTo(x, y - 8); g.lineTo(x - 5, y - 16); g.lineTo(x + 5, y - 16); g.fill();
  }
}

function rectFrame(w, h) { return { x0: absolute() ? 84 : 56, x1: w - 12, y0: 12, y1: h - 40 }; }

function drawRect(P, T, mk, S) {
  const { g, w, h } = ctxOf("rect");
  const f = rectFrame(w, h), range = rangeDb();
  const X = (deg) => f.x0 + (deg + 180) / 360 * (f.x1 - f.x0);
  const Y = (lv) => f.y0 + Math.min(1, -lv / range) * (f.y1 - f.y0);
  g.strokeStyle = COLOURS.grid; g.fillStyle = COLOURS.text; g.lineWidth = 1;
  g.textAlign = "right";
  for (let lv = 0; lv >= -range; lv -= 10) {
    g.beginPath(); g.moveTo(f.x0, Y(lv)); g.lineTo(f.x1, Y(lv)); g.stroke();
    g.fillText(S.tick(lv), f.x0 - 6, Y(lv) + 4);
  }
  if (absolute()) {
    g.save(); g.translate(14, (f.y0 + f.y1) / 2); g.rotate(-Math.PI / 2);
    g.textAlign = "center"; g.fillText(absolute().label, 0, 0); g.restore();
  }
  g.textAlign = "center";
  for (let a = -180; a <= 180; a += 45) {
    g.beginPath(); g.moveTo(X(a), f.y0); g.lineTo(X(a), f.y1); g.stroke();
    g.fillText(a + "°", X(a), f.y1 + 16);
  }
  g.fillText("angle (deg)", (f.x0 + f.x1) / 2, h - 6);
  const trace = (pts, key, peak, colour, dash) => {
    if (!isFinite(peak)) return;
    g.strokeStyle = colour; g.lineWidth = 1.6; g.setLineDash(dash); g.beginPath();
    let prev = null;
    for (const p of pts) {
      if (p[key] === null) { prev = null; continue; }
      const x = X(p.deg), y = Y(p[key] - S.base(peak));
      if (prev !== null && p.deg - prev <= 10) g.lineTo(x, y); else g.moveTo(x, y);
      prev = p.deg;
    }
    g.stroke(); g.setLineDash([]);
  };
  if (shown("raw")) trace(P.pts, "raw", P.peakRaw, COLOURS.raw, []);
  if (shown("gated")) trace(P.pts, "gated", P.peakGated, COLOURS.gated, []);
  if (T && shown("truth")) trace(T.pts, "v", T.peak, COLOURS.truth, [5, 4]);
  // Bins the gate's self-checks flagged, as ticks on the axis.
  g.strokeStyle = COLOURS.flag; g.lineWidth = 2;
  for (const p of P.pts) if (p.flags & GATE_FLAGS) { g.beginPath(); g.moveTo(X(p.deg), f.y1); g.lineTo(X(p.deg), f.y1 - 8); g.stroke(); }
  g.lineWidth = 1;
  if (mk) {
    g.strokeStyle = COLOURS.gated; g.setLineDash([2, 3]);
    for (const a of [mk.left, mk.right]) if (a !== null) { g.beginPath(); g.moveTo(X(a), f.y0); g.lineTo(X(a), f.y1); g.stroke(); }
    g.setLineDash([]);
    const y3 = Y(mk.peakDb - 3 - S.base(mk.peakDb));
    g.beginPath(); g.moveTo(f.x0, y3); g.lineTo(f.x1, y3); g.stroke();
  }
  const c = cursorDeg();
  if (c !== null) { g.strokeStyle = COLOURS.cursor; g.beginPath(); g.moveTo(X(c), f.y0); g.lineTo(X(c), f.y1); g.stroke(); }
  legend(g, f.x1 - 8, f.y1 - 10, T !== null);
}

// The legend sits in the lower right corner, under the −range line's labels, below the traces' usual area.
function legend(g, x, y, truth) {
  const items = [["raw", COLOURS.raw], ["gated", COLOURS.gated]];
  if (truth) items.push(["truth", COLOURS.truth]);
  g.textAlign = "right";
  g.fillStyle = "rgba(255,255,255,0.85)";
  g.fillRect(x - 70, y - 16 * items.length, 74, 16 * items.length + 4);
  items.forEach(([name, colour], i) => {
    const yy = y - 16 * (items.length - 1 - i);
    g.fillStyle = colour; g.fillRect(x - 66, yy - 6, 16, 3);
    g.fillStyle = COLOURS.text; g.fillText(name, x, yy);
  });
}

function heat(t) {
  // Dark blue (weak) through teal and yellow to white (strong).
  const stops = [[0, [20, 24, 60]], [0.4, [20, 110, 140]], [0.75, [230, 200, 40]], [1, [255, 255, 240]]];
  for (let i = 1; i < stops.length; i++) {
    if (t <= stops[i][0]) {
      const [a, ca] = stops[i - 1], [b, cb] = stops[i], u = (t - a) / (b - a);
      return "rgb(" + ca.map((v, k) => Math.round(v + u * (cb[k] - v))).join(",") + ")";
    }
  }
  return "rgb(255,255,240)";
}

function drawMap() {
  const { g, w, h } = ctxOf("map");
  const f = { x0: 56, x1: w - 80, y0: 10, y1: h - 36 };
  const recs = [...view.impulses.values()];
  g.fillStyle = COLOURS.text;
  if (recs.length === 0) {
    g.textAlign = "center";
    g.fillText("no impulse-response records yet (they come at a low rate, one bin in several)", (f.x0 + f.x1) / 2, (f.y0 + f.y1) / 2);
    return;
  }
  const t0 = Math.min(...recs.map((r) => r.t0_ns));
  const t1 = Math.max(...recs.map((r) => r.t0_ns + r.dt_ns * r.levels_db.length));
  const top = Math.max(...recs.map((r) => r.peak_db));
  const range = rangeDb() + 10;
  const X = (deg) => f.x0 + (deg + 180) / 360 * (f.x1 - f.x0);
  const Y = (t) => f.y1 - (t - t0) / (t1 - t0) * (f.y1 - f.y0);
  const colW = Math.max(2, (f.x1 - f.x0) / Math.max(recs.length, (view.meta.total_bins || 360) / 4));
  g.fillStyle = "#141834"; g.fillRect(f.x0, f.y0, f.x1 - f.x0, f.y1 - f.y0);
  for (const r of recs) {
    const x = X(wrapDeg(r.angle_deg)) - colW / 2;
    r.levels_db.forEach((lv, i) => {
      g.fillStyle = lv === null ? heat(0) : heat(Math.max(0, Math.min(1, 1 + (lv - top) / range)));
      const ya = Y(r.t0_ns + i * r.dt_ns), yb = Y(r.t0_ns + (i + 1) * r.dt_ns);
      g.fillRect(x, yb, colW + 0.5, ya - yb + 0.5);
    });
  }
  g.strokeStyle = COLOURS.grid; g.fillStyle = COLOURS.text; g.textAlign = "center";
  for (let a = -180; a <= 180; a += 45) g.fillText(a + "°", X(a), f.y1 + 16);
  g.fillText("angle (deg)", (f.x0 + f.x1) / 2, h - 4);
  g.textAlign = "right";
  const step = niceStep((t1 - t0) / 5);
  for (let t = Math.ceil(t0 / step) * step; t <= t1; t += step) g.fillText(t.toFixed(step < 1 ? 1 : 0) + " ns", f.x0 - 6, Y(t) + 4);
  const c = view.meta.gate_center_ns, s = view.meta.gate_span_ns;
  if (c !== null && s !== null && c !== undefined && s !== undefined) {
    g.strokeStyle = "#ff5252"; g.lineWidth = 2; g.setLineDash([6, 4]);
    for (const t of [c - s / 2, c + s / 2]) if (t >= t0 && t <= t1) { g.beginPath(); g.moveTo(f.x0, Y(t)); g.lineTo(f.x1, Y(t)); g.stroke(); }
    g.setLineDash([]); g.lineWidth = 1;
    g.textAlign = "left"; g.fillStyle = "#c62828"; g.fillText("gate", f.x1 + 6, Y(c) + 4);
  }
  // Colour scale.
  for (let i = 0; i < 100; i++) { g.fillStyle = heat(1 - i / 100); g.fillRect(f.x1 + 44, f.y0 + i * (f.y1 - f.y0) / 100, 12, (f.y1 - f.y0) / 100 + 1); }
  g.fillStyle = COLOURS.text; g.textAlign = "left";
  g.fillText("0", f.x1 + 60, f.y0 + 8); g.fillText("-" + range, f.x1 + 58, f.y1);
}

function niceStep(x) {
  const p = Math.pow(10, Math.floor(Math.log10(x)));
  for (const m of [1, 2, 5, 10]) if (m * p >= x) return m * p;
  return 10 * p;
}

function cursorDeg() { return view.heldDeg !== null ? view.heldDeg : view.cursorDeg; }

// ------------------------------------------------------------------ panels

function rows(id, list) {
  $(id).innerHTML = list.map(([k, v, cls]) => `<tr><td>${k}</td><td class="num ${cls || ""}">${v}</td></tr>`).join("");
}

function drawPanels(P, mk, mkRaw) {
  const c = cursorDeg(), near = c === null ? null : nearest(P.pts, c), u = unit();
  const cursorRows = absolute()
    ? [["cursor, gated", near ? `${fmt(near.gated, 2)} ${u}` : "–"],
      ["cursor, raw", near ? `${fmt(near.raw, 2)} ${u}` : "–"]]
    : [["cursor, gated re peak", near ? `${fmt(near.gated - P.peakGated, 2)} dB` : "–"],
      ["cursor, raw re peak", near ? `${fmt(near.raw - P.peakRaw, 2)} dB` : "–"]];
  rows("marker-table", [
    ["frequency", frequencyName(view.selected)],
    ["peak, gated", mk ? `${fmt(mk.peakDb, 2)} ${u} at ${fmt(mk.peakDeg, 1)}°` : "–"],
    ["−3 dB points, gated", mk ? `${fmt(mk.left, 1)}° … ${fmt(mk.right, 1)}°` : "–"],
    ["−3 dB width, gated", mk ? `${fmt(mk.width, 1)}°` : "–"],
    ["peak, raw", mkRaw ? `${fmt(mkRaw.peakDb, 2)} ${u} at ${fmt(mkRaw.peakDeg, 1)}°` : "–"],
    ["−3 dB width, raw", mkRaw ? `${fmt(mkRaw.width, 1)}°` : "–"],
    ["cursor" + (view.heldDeg !== null ? " (held)" : ""), near ? `${fmt(near.deg, 1)}° (bin ${near.bin})` : "–"],
    ...cursorRows,
  ]);
  const st = view.status, total = view.meta.total_bins;
  const filled = view.bins.size;
  rows("scan-table", [
    ["bins filled", total ? `${filled} / ${total}` : `${filled}`],
    ["positioner", st ? `${fmt(st.angle_deg, 2)}°, ${st.state}` : "–"],
    ["speed", st ? `${fmt(st.speed_deg_s, 2)} deg/s` : "–"],
    ["sweeps", st ? `${st.sweeps_pushed} in, ${st.sweeps_binned} binned, ${st.sweeps_rejected} refused` : "–", st && st.sweeps_rejected > 0 ? "warn" : ""],
    ["angle samples", st ? `${st.angles_pushed} in, ${st.angles_rejected} refused` : "–", st && st.angles_rejected > 0 ? "warn" : ""],
    ["sweeps per second (scan time)", fmt(view.sweepRate, 1)],
    ["gate", view.meta.gate_center_ns !== null && view.meta.gate_center_ns !== undefined ? `${fmt(view.meta.gate_center_ns, 2)} ns ± ${fmt(view.meta.gate_span_ns / 2, 2)} ns` : "–"],
    ["state", view.ended ? "scan ended" : "scanning"],
  ]);
  const pct = total ? Math.min(100, 100 * filled / total) : 0;
  $("progress-bar").style.width = pct + "%";
  $("progress-text").textContent = total ? `${filled} of ${total} bins (${pct.toFixed(0)} %)` : `${filled} bins`;
  drawFlags();
  $("notes").innerHTML = view.meta.notes.map((n) => `<li class="warn"></li>`).join("");
  [...$("notes").children].forEach((li, i) => { li.textContent = view.meta.notes[i]; });
  if (view.meta.notes.length === 0) $("notes").innerHTML = "<li>none</li>";
}

function drawFlags() {
  const all = [...view.bins.values()];
  rows("flag-table", FLAG_NAMES.map(([bit, name]) => {
    const n = all.filter((b) => b.flags & bit).length;
    return [name, String(n), n > 0 && (bit & GATE_FLAGS) ? "warn" : ""];
  }));
  const bad = all.filter((b) => b.flags & GATE_FLAGS).map((b) => fmt(wrapDeg(b.nominal_deg), 1) + "°");
  $("flag-list").textContent = bad.length ? "gate checks failed at " + bad.slice(0, 24).join(", ") + (bad.length > 24 ? ` and ${bad.length - 24} more` : "") : "";
}

// ------------------------------------------------------------------ the end of the scan

function applyEnd(e) {
  if (view.ended) return;
  view.ended = e;
  $("report").hidden = false;
  $("report-summary").textContent = e.summary;
  const list = $("report-files");
  list.innerHTML = "";
  for (const name of e.files) {
    const li = document.createElement("li");
    const a = document.createElement("a");
    a.href = "/report/" + encodeURIComponent(name);
    a.textContent = name;
    li.appendChild(a);
    list.appendChild(li);
  }
  const plots = $("report-plots");
  plots.innerHTML = "";
  for (const name of e.files.filter((n) => n.endsWith(".svg"))) {
    const img = document.createElement("img");
    img.src = "/report/" + encodeURIComponent(name);
    img.alt = name;
    plots.appendChild(img);
  }
  if (e.files.includes("pattern.csv")) {
    fetch("/report/pattern.csv").then((r) => (r.ok ? r.text() : "")).then(readTruth).catch(() => {});
  }
}

// pattern.csv's truth_db column, when the truth was known, per frequency.
function readTruth(text) {
  const lines = text.split("\n").filter((l) => l.length > 0 && !l.startsWith("#"));
  if (lines.length < 2) return;
  const head = lines[0].split(",");
  const ia = head.indexOf("angle_deg"), jf = head.indexOf("frequency_hz"), jt = head.indexOf("truth_db");
  if (ia < 0 || jf < 0 || jt < 0) return;
  const truth = new Map();
  for (const l of lines.slice(1)) {
    const c = l.split(",");
    const v = Number(c[jt]);
    if (c[jt] === "" || !isFinite(v)) continue;
    const f = Number(c[jf]);
    if (!truth.has(f)) truth.set(f, []);
    truth.get(f).push([Number(c[ia]), v]);
  }
  if (truth.size > 0) { view.truth = truth; view.dirty = true; }
}

// ------------------------------------------------------------------ the loop

function redraw() {
  if (view.dirty) {
    view.dirty = false;
    fillFrequencies();
    $("title").textContent = view.meta.title;
    $("source").textContent = view.meta.source;
    // The truth column of |S21| reports is relative: not drawn over absolute levels.
    const P = patternPoints(), T = absolute() ? null : truthPoints(), S = levelScale(P);
    const mk = markers(P.pts, "gated", P.peakGated), mkRaw = markers(P.pts, "raw", P.peakRaw);
    captions();
    drawPolar(P, T, mk, S);
    drawRect(P, T, mk, S);
    drawMap();
    drawPanels(P, mk, mkRaw);
    window.sweepgateView.binsDrawn = P.pts.length;
    window.sweepgateView.levelLabel = absolute() ? absolute().label : "dB re each trace's peak";
    window.sweepgateView.draws++;
    $("bins-drawn").textContent = String(P.pts.length);
    $("records").textContent = String(view.records);
  }
  requestAnimationFrame(redraw);
}

// The plots' captions name what the levels are.
function captions() {
  const what = absolute() ? absolute().label : "dB re each trace's peak";
  $("polar-caption").textContent = "polar, " + what;
  $("rect-caption").textContent = "rectangular, " + what;
}

function rectDeg(ev) {
  const c = $("rect"), box = c.getBoundingClientRect(), f = rectFrame(box.width, box.height);
  const x = ev.clientX - box.left;
  if (x < f.x0 || x > f.x1) return null;
  return -180 + (x - f.x0) / (f.x1 - f.x0) * 360;
}

function polarDeg(ev) {
  const box = $("polar").getBoundingClientRect();
  const dx = ev.clientX - box.left - box.width / 2, dy = ev.clientY - box.top - box.height / 2;
  return wrapDeg(Math.atan2(dx, -dy) * 180 / Math.PI);
}

function wire() {
  $("frequency").addEventListener("change", (e) => { view.selected = Number(e.target.value); view.dirty = true; });
  for (const id of ["range", "show-raw", "show-gated", "show-truth"]) $(id).addEventListener("change", () => { view.dirty = true; });
  const hover = (toDeg) => (ev) => { view.cursorDeg = toDeg(ev); view.dirty = true; };
  const click = (toDeg) => (ev) => { const d = toDeg(ev); view.heldDeg = view.heldDeg === null ? d : null; view.dirty = true; };
  $("rect").addEventListener("mousemove", hover(rectDeg));
  $("polar").addEventListener("mousemove", hover(polarDeg));
  $("rect").addEventListener("click", click(rectDeg));
  $("polar").addEventListener("click", click(polarDeg));
  for (const id of ["rect", "polar"]) $(id).addEventListener("mouseleave", () => { view.cursorDeg = null; view.dirty = true; });
}

wire();
connect();
requestAnimationFrame(redraw);

// riffle's charts: plain SVG, no dependencies, shared by the live status
// page and the HTML report. Every data mark has class "datum", every tick
// label class "tick"; the browser test counts them.
"use strict";

const riffleChart = (() => {
  const NS = "http://www.w3.org/2000/svg";
  const M = {top: 14, right: 16, bottom: 44, left: 64};

  function el(parent, name, attrs, text) {
    const e = document.createElementNS(NS, name);
    for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, v);
    if (text !== undefined) e.textContent = text;
    parent.appendChild(e);
    return e;
  }

  // niceTicks returns about n round values covering [lo, hi].
  function niceTicks(lo, hi, n) {
    if (!(hi > lo)) { const d = Math.abs(lo) > 0 ? Math.abs(lo) * 0.1 : 0.01; lo -= d; hi += d; }
    const raw = (hi - lo) / Math.max(1, n);
    const mag = Math.pow(10, Math.floor(Math.log10(raw)));
    const step = [1, 2, 2.5, 5, 10].map(m => m * mag).find(s => s >= raw) || 10 * mag;
    const out = [];
    for (let v = Math.floor(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
    if (out[out.length - 1] < hi) out.push(out[out.length - 1] + step);
    return {ticks: out, step};
  }

  const timeSteps = [1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 900, 1800, 3600, 7200, 10800, 21600, 43200, 86400, 172800, 604800].map(s => s * 1000);

  // timeTicks returns round UTC instants covering [lo, hi] (milliseconds).
  function timeTicks(lo, hi, n) {
    if (!(hi > lo)) { lo -= 30000; hi += 30000; }
    const step = timeSteps.find(s => (hi - lo) / s <= n) || timeSteps[timeSteps.length - 1];
    const out = [];
    for (let v = Math.ceil(lo / step) * step; v <= hi; v += step) out.push(v);
    return {ticks: out, step, lo, hi};
  }

  function pad(n) { return String(n).padStart(2, "0"); }

  // timeLabel formats an instant in UTC at the resolution the step needs.
  function timeLabel(ms, step) {
    const d = new Date(ms);
    const hm = pad(d.getUTCHours()) + ":" + pad(d.getUTCMinutes());
    if (step >= 86400000) return d.toISOString().slice(5, 10);
    if (step >= 60000) return hm;
    return hm + ":" + pad(d.getUTCSeconds());
  }

  function frame(svg) {
    svg.replaceChildren();
    const W = Number(svg.getAttribute("width")), H = Number(svg.getAttribute("height"));
    return {W, H, x0: M.left, x1: W - M.right, y0: H - M.bottom, y1: M.top};
  }

  function empty(svg, text) {
    const f = frame(svg);
    el(svg, "text", {x: f.W / 2, y: f.H / 2, "text-anchor": "middle", class: "empty"}, text);
  }

  // yAxis draws the value axis with ticks, grid and title; zero, when in
  // range, gets a labelled line.
  function yAxis(svg, f, y, ticks, spec) {
    for (const v of ticks) {
      const py = y(v);
      el(svg, "line", {x1: f.x0, x2: f.x1, y1: py, y2: py, class: "grid"});
      el(svg, "text", {x: f.x0 - 6, y: py + 4, "text-anchor": "end", class: "tick"}, spec.fmt(v));
    }
    el(svg, "text", {x: 14, y: (f.y0 + f.y1) / 2, transform: `rotate(-90 14 ${(f.y0 + f.y1) / 2})`, "text-anchor": "middle", class: "axis-title"}, spec.label);
    if (spec.zero && ticks[0] <= 0 && ticks[ticks.length - 1] >= 0) {
      el(svg, "line", {x1: f.x0, x2: f.x1, y1: y(0), y2: y(0), class: "zero"});
      el(svg, "text", {x: f.x1 - 4, y: y(0) - 4, "text-anchor": "end", class: "zero-label"}, spec.zero);
    }
  }

  // line draws series and bands over a time or numeric x axis.
  // spec: {x: {time: bool, label, fmt}, y: {label, fmt, zero, min, max},
  //        bands: [{key, cls, color, points: [[x, lo, hi]]}],
  //        series: [{key, color, dash, points: [[x, y]]}],
  //        marks: [{x, label}]}
  function line(svg, spec) {
    const xs = [], ys = [];
    for (const b of spec.bands || []) for (const p of b.points) { xs.push(p[0]); ys.push(p[1], p[2]); }
    for (const s of spec.series) for (const p of s.points) { if (p[1] !== null) { xs.push(p[0]); ys.push(p[1]); } }
    if (xs.length === 0) { empty(svg, spec.empty || "no data yet"); return; }
    const f = frame(svg);
    let ylo = Math.min(...ys), yhi = Math.max(...ys);
    if (spec.y.min !== undefined) ylo = Math.min(ylo, spec.y.min);
    if (spec.y.max !== undefined) yhi = Math.max(yhi, spec.y.max);
    if (spec.y.zero) { ylo = Math.min(ylo, 0); yhi = Math.max(yhi, 0); }
    const yt = niceTicks(ylo, yhi, 5);
    ylo = yt.ticks[0]; yhi = yt.ticks[yt.ticks.length - 1];
    const y = v => f.y0 - (v - ylo) * (f.y0 - f.y1) / (yhi - ylo);
    let xt;
    if (spec.x.time) xt = timeTicks(Math.min(...xs), Math.max(...xs), 6);
    else { const t = niceTicks(Math.min(...xs), Math.max(...xs), 6); xt = {ticks: t.ticks, step: t.step, lo: t.ticks[0], hi: t.ticks[t.ticks.length - 1]}; }
    const x = v => f.x0 + (v - xt.lo) * (f.x1 - f.x0) / (xt.hi - xt.lo);
    yAxis(svg, f, y, yt.ticks, spec.y);
    for (const v of xt.ticks) {
      el(svg, "line", {x1: x(v), x2: x(v), y1: f.y0, y2: f.y0 + 5, class: "axis"});
      el(svg, "text", {x: x(v), y: f.y0 + 18, "text-anchor": "middle", class: "tick"}, spec.x.time ? timeLabel(v, xt.step) : spec.x.fmt(v));
    }
    el(svg, "line", {x1: f.x0, x2: f.x1, y1: f.y0, y2: f.y0, class: "axis"});
    el(svg, "text", {x: (f.x0 + f.x1) / 2, y: f.H - 6, "text-anchor": "middle", class: "axis-title"}, spec.x.label);
    for (const b of spec.bands || []) {
      const up = b.points.map(p => `${x(p[0])},${y(p[2])}`), down = b.points.slice().reverse().map(p => `${x(p[0])},${y(p[1])}`);
      if (b.cls === "band-main") el(svg, "polygon", {points: up.concat(down).join(" "), class: "datum band-main", "data-key": b.key, fill: b.color});
      else {
        el(svg, "polyline", {points: up.join(" "), class: "datum band-secondary", "data-key": b.key, stroke: b.color});
        el(svg, "polyline", {points: down.join(" "), class: "datum band-secondary", "data-key": b.key, stroke: b.color});
      }
    }
    for (const s of spec.series) {
      const pts = s.points.filter(p => p[1] !== null);
      if (pts.length === 0) continue;
      el(svg, "path", {d: pts.map((p, i) => `${i ? "L" : "M"}${x(p[0])},${y(p[1])}`).join(" "), class: "datum series", "data-key": s.key, stroke: s.color, "stroke-dasharray": s.dash || "none"});
      if (pts.length <= 60) for (const p of pts) el(svg, "circle", {cx: x(p[0]), cy: y(p[1]), r: 2.5, class: "datum dot", fill: s.color});
    }
    for (const m of spec.marks || []) {
      el(svg, "line", {x1: x(m.x), x2: x(m.x), y1: f.y1, y2: f.y0, class: "mark"});
      el(svg, "text", {x: x(m.x) + 4, y: f.y1 + 10, class: "mark-label"}, m.label);
    }
  }

  // bars draws grouped vertical bars: categories along x, one bar per
  // group in each, with its value above it when labels is set.
  // spec: {categories, x: {label}, y: {label, fmt}, labels,
  //        groups: [{key, color, values, notes}]}
  function bars(svg, spec) {
    const vals = spec.groups.flatMap(g => g.values).filter(v => v !== null);
    if (spec.categories.length === 0 || vals.length === 0) { empty(svg, spec.empty || "no data yet"); return; }
    const f = frame(svg);
    const yt = niceTicks(0, Math.max(...vals, 0), 5);
    const yhi = yt.ticks[yt.ticks.length - 1];
    const y = v => f.y0 - v * (f.y0 - f.y1) / yhi;
    yAxis(svg, f, y, yt.ticks, spec.y);
    const cw = (f.x1 - f.x0) / spec.categories.length, bw = cw * 0.8 / spec.groups.length;
    spec.categories.forEach((c, i) => {
      el(svg, "text", {x: f.x0 + cw * (i + 0.5), y: f.y0 + 18, "text-anchor": "middle", class: "tick"}, c);
      spec.groups.forEach((g, j) => {
        const v = g.values[i];
        if (v === null || v === undefined) return;
        const r = el(svg, "rect", {x: f.x0 + cw * i + cw * 0.1 + bw * j, y: y(v), width: bw * 0.92, height: f.y0 - y(v), class: "datum bar", "data-key": g.key, fill: g.color});
        el(r, "title", {}, `${g.key} ${c}: ${spec.y.fmt(v)}${g.notes ? " (" + g.notes[i] + ")" : ""}`);
        if (spec.labels) el(svg, "text", {x: f.x0 + cw * i + cw * 0.1 + bw * (j + 0.46), y: y(v) - 3, "text-anchor": "middle", class: "count"}, spec.y.fmt(v));
      });
    });
    el(svg, "line", {x1: f.x0, x2: f.x1, y1: f.y0, y2: f.y0, class: "axis"});
    el(svg, "text", {x: (f.x0 + f.x1) / 2, y: f.H - 6, "text-anchor": "middle", class: "axis-title"}, spec.x.label);
  }

  // hbars draws labelled horizontal bars with their counts.
  // spec: {rows: [{label, value, color}], x: {label}}
  function hbars(svg, spec) {
    if (spec.rows.length === 0) { empty(svg, spec.empty || "none so far"); return; }
    svg.setAttribute("height", String(M.top + 22 * spec.rows.length + 40));
    const f = frame(svg);
    const left = 190, top = Math.max(...spec.rows.map(r => r.value), 1);
    const xt = niceTicks(0, top, 4), xhi = xt.ticks[xt.ticks.length - 1];
    const x = v => left + v * (f.x1 - 50 - left) / xhi;
    for (const v of xt.ticks) {
      el(svg, "line", {x1: x(v), x2: x(v), y1: f.y1, y2: f.y0, class: "grid"});
      el(svg, "text", {x: x(v), y: f.y0 + 16, "text-anchor": "middle", class: "tick"}, String(v));
    }
    spec.rows.forEach((r, i) => {
      const py = f.y1 + 22 * i;
      el(svg, "text", {x: left - 6, y: py + 14, "text-anchor": "end", class: "row-label"}, r.label);
      el(svg, "rect", {x: left, y: py + 3, width: Math.max(1, x(r.value) - left), height: 15, class: "datum bar", fill: r.color});
      el(svg, "text", {x: x(r.value) + 4, y: py + 15, class: "count"}, Number(r.value).toLocaleString("en-US"));
    });
    el(svg, "text", {x: (left + f.x1) / 2, y: f.H - 6, "text-anchor": "middle", class: "axis-title"}, spec.x.label);
  }

  return {line, bars, hbars, niceTicks, timeTicks};
})();

// riffleFormat holds the number formats shared by the page and the report.
const riffleFormat = {
  // p-value: three decimals from 0.001 up, else 1.0e-06, never 0.
  p(v) {
    if (v === null || v === undefined || Number.isNaN(v)) return "–";
    if (v >= 0.001) return v.toFixed(3);
    const [m, e] = v.toExponential(1).split("e");
    const n = Math.abs(Number(e));
    return `${m}e${e[0] === "-" ? "-" : "+"}${String(n).padStart(2, "0")}`;
  },
  // Delta and its interval ends: signed, three decimals.
  delta(v) { return (v === null || v === undefined || Number.isNaN(v)) ? "–" : (v < 0 ? "-" : "+") + Math.abs(v).toFixed(3); },
  interval(iv) { return iv ? `[${riffleFormat.delta(iv[0])}, ${riffleFormat.delta(iv[1])}]` : "–"; },
  pct(v, d) { return (v === null || v === undefined || Number.isNaN(v)) ? "–" : (100 * v).toFixed(d === undefined ? 1 : d) + "%"; },
  count(n) { return (n === null || n === undefined) ? "–" : Number(n).toLocaleString("en-US"); },
  ms(v) { return (v === null || v === undefined) ? "–" : (v * 1000).toFixed(1) + " ms"; },
};

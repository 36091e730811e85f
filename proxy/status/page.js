// The live status page: polls the experiment API, history.json and
// live.json every two seconds and redraws.
"use strict";

const F = riffleFormat;
const css = name => getComputedStyle(document.documentElement).getPropertyValue(name).trim();
const set = (id, v) => { document.getElementById(id).textContent = v; };
const utc = ms => new Date(ms).toISOString().slice(11, 19) + " UTC";

const glosses = {
  "challenger-better": "users prefer the challenger's items",
  "incumbent-better": "users prefer the incumbent's items",
  "on-par": "no difference larger than the margin",
  "undecided": "not enough evidence either way yet",
};

function sumValues(m) { return Object.values(m || {}).reduce((a, b) => a + b, 0); }
function listCounts(m) {
  const keys = Object.keys(m || {}).filter(k => m[k] > 0).sort();
  return keys.length ? keys.map(k => `${k} ${F.count(m[k])}`).join(", ") : "none";
}

function showHarm(s, live, hist) {
  const g = s.guardrail || {};
  const errs = (live.totals.errors || {}).challenger || {};
  const failed = sumValues(errs);
  const a = document.getElementById("harm-answer");
  if (g.tripped) {
    a.className = "answer alarm";
    a.textContent = `Guardrail ${g.guardrail} tripped${g.at ? " at " + utc(Date.parse(g.at)) : ""}: ${g.reason}. The challenger is held back (ramp 0%) until a reload or a reset.`;
  } else {
    a.className = "answer";
    a.textContent = `No guardrail has tripped. The challenger failed ${F.count(failed)} call${failed === 1 ? "" : "s"} since this sidecar started; each time the user got the incumbent's list.`;
  }
  set("chal-errors", listCounts(errs));
  const series = [];
  for (const [model, color] of [["incumbent", css("--incumbent")], ["challenger", css("--challenger")]]) {
    for (const [q, dash] of [["p50", "none"], ["p99", "5 4"]]) {
      series.push({key: `${model}-${q}`, color, dash, points: hist.map(p => [Date.parse(p.time), p.latency && p.latency[model] ? 1000 * p.latency[model][q] : null])});
    }
  }
  riffleChart.line(document.getElementById("chart-latency"), {
    x: {time: true, label: "time (UTC)"}, y: {label: "latency (ms)", fmt: v => v.toFixed(1), min: 0},
    series, empty: "no backend calls yet",
  });
  const rows = Object.keys(live.totals.incumbent_only || {}).map(r => ({label: r, value: live.totals.incumbent_only[r]}))
    .filter(r => r.value > 0).sort((p, q) => q.value - p.value)
    .map(r => ({...r, color: (r.label === "ramp" || r.label === "guardrail" || r.label === "client-gone") ? css("--neutral") : css("--alarm")}));
  riffleChart.hbars(document.getElementById("chart-fallbacks"), {rows, x: {label: "requests"}, empty: "every request was interleaved"});
}

function showProgress(s, live, hist) {
  const open = Math.max(0, s.interleaved - s.with_feedback - (s.no_feedback || 0));
  set("n-impressions", F.count(s.impressions));
  set("n-interleaved", `${F.count(s.interleaved)} (${F.pct(s.impressions ? s.interleaved / s.impressions : null)})`);
  set("n-open", F.count(open));
  const ev = live.totals.events || {};
  set("n-events", `${F.count(sumValues(ev))}${Object.keys(ev).length ? " (" + listCounts(ev) + ")" : ""}`);
  set("n-with-feedback", F.count(s.with_feedback));
  set("n-no-feedback", F.count(s.no_feedback));
  set("window-note", `An impression's outcome is counted once its ${live.window} attribution window has closed, so outcomes trail feedback by up to ${live.window}: feedback on the ${F.count(open)} impressions still inside their window is in the events count above, not yet in the outcomes.`);
  let answer;
  if (s.verdict !== "undecided") answer = `Decided: ${s.verdict}.`;
  else if (s.needed > 0) answer = `About ${F.count(s.needed)} more impressions with feedback are needed for the planned power${s.eta ? ", about " + s.eta + " at the last hour's rate" : ""}.`;
  else answer = "The planned sample is reached; a remaining difference is likely smaller than the one planned for.";
  set("progress-answer", `Ramp in force ${F.pct(s.ramp, 0)}. ${answer}`);
  riffleChart.line(document.getElementById("chart-ramp"), {
    x: {time: true, label: "time (UTC)"}, y: {label: "users interleaved (%)", fmt: v => v.toFixed(0) + "%", min: 0, max: 100},
    series: [{key: "ramp", color: css("--delta"), points: hist.map(p => [Date.parse(p.time), 100 * p.ramp])}],
  });
  riffleChart.line(document.getElementById("chart-counts"), {
    x: {time: true, label: "time (UTC)"}, y: {label: "impressions", fmt: v => F.count(v), min: 0},
    series: [
      {key: "interleaved", color: css("--neutral"), points: hist.map(p => [Date.parse(p.time), p.interleaved])},
      {key: "open", color: css("--band"), dash: "5 4", points: hist.map(p => [Date.parse(p.time), p.open])},
      {key: "with_feedback", color: css("--delta"), points: hist.map(p => [Date.parse(p.time), p.with_feedback])},
    ],
  });
}

function decidedText(d) {
  if (!d) return "No decision yet. A decision, once reached, is shown here with when it was reached and its evidence.";
  const at = d.at || d.time;
  const iv = d.cs_delta || d.interval;
  const parts = [`Decided ${d.verdict}`];
  if (at) parts.push(`at ${new Date(Date.parse(at)).toISOString().replace("T", " ").slice(0, 19)} UTC`);
  if (d.with_feedback !== undefined) parts.push(`after ${F.count(d.with_feedback)} impressions with feedback`);
  const ev = [];
  if (d.p_value !== undefined) ev.push(`always-valid p ${F.p(d.p_value)}`);
  if (iv) ev.push(`interval ${F.interval(iv)}`);
  if (d.config_hash) ev.push(`config ${d.config_hash}`);
  return parts.join(" ") + (ev.length ? ` (${ev.join(", ")})` : "") + ".";
}

function showPreference(s, hist) {
  const box = document.getElementById("decision");
  box.className = "decision v-" + s.verdict;
  set("verdict", s.verdict);
  set("verdict-gloss", glosses[s.verdict] || "");
  set("reason", s.reason || "");
  set("figures-line", `Δ ${F.delta(s.delta)} · always-valid interval ${F.interval(s.cs_delta)} · always-valid p ${F.p(s.p_value)} (alpha ${s.alpha}) · fixed-sample interval ${F.interval(s.ci)} · ${F.count(s.with_feedback)} impressions with feedback`);
  set("decided", decidedText(s.decided));
  const withData = hist.filter(p => p.with_feedback > 0);
  const marks = [];
  const at = s.decided && (s.decided.at || s.decided.time);
  if (at) marks.push({x: Date.parse(at), label: "decided: " + s.decided.verdict});
  else {
    const first = withData.find(p => p.verdict !== "undecided");
    if (first) marks.push({x: Date.parse(first.time), label: "first " + first.verdict});
  }
  riffleChart.line(document.getElementById("chart-delta"), {
    x: {time: true, label: "time (UTC)"}, y: {label: "Δ (preference for the challenger)", fmt: v => F.delta(v), zero: "0: no preference"},
    bands: [
      {key: "cs_delta", cls: "band-main", color: css("--band"), points: withData.map(p => [Date.parse(p.time), p.cs_delta[0], p.cs_delta[1]])},
      {key: "ci", cls: "band-secondary", color: css("--neutral"), points: withData.map(p => [Date.parse(p.time), p.ci[0], p.ci[1]])},
    ],
    series: [{key: "delta", color: css("--delta"), points: withData.map(p => [Date.parse(p.time), p.delta])}],
    marks, empty: "no outcomes with feedback yet",
  });
}

function showPositions(live) {
  const ps = live.positions || {};
  const inc = ps.incumbent || [], chal = ps.challenger || [];
  const n = Math.max(inc.length, chal.length);
  const cats = Array.from({length: n}, (_, i) => String(i + 1));
  set("positions-since", live.positions_since ? "served since " + utc(Date.parse(live.positions_since)) : (live.problem || "not available"));
  for (const [id, ev] of [["chart-clicks", "click"], ["chart-purchases", "purchase"]]) {
    const rate = list => cats.map((_, i) => list[i] && list[i].shown > 0 ? (list[i].events[ev] || 0) / list[i].shown : null);
    const notes = list => cats.map((_, i) => list[i] ? `${list[i].events[ev] || 0} of ${list[i].shown} slots` : "not shown");
    riffleChart.bars(document.getElementById(id), {
      categories: cats, x: {label: "slot position (1 = top)"}, y: {label: `${ev} rate (% of slots)`, fmt: v => F.pct(v)},
      groups: [{key: "incumbent", color: css("--incumbent"), values: rate(inc), notes: notes(inc)},
        {key: "challenger", color: css("--challenger"), values: rate(chal), notes: notes(chal)}],
      empty: "no interleaved impressions in the last hour",
    });
  }
}

async function getJSON(url) {
  const r = await fetch(url, {cache: "no-store"});
  if (!r.ok) throw new Error(`${url}: HTTP ${r.status}`);
  return r.json();
}

async function refresh() {
  try {
    const [s, hist, live] = await Promise.all([getJSON("/api/v1/experiment"), getJSON("history.json"), getJSON("live.json")]);
    set("experiment", s.experiment); set("policy", s.policy); set("window", live.window);
    showHarm(s, live, hist);
    showProgress(s, live, hist);
    showPreference(s, hist);
    showPositions(live);
    set("updated", utc(Date.now()));
    set("error", s.store && !s.store.available ? `store unavailable since ${s.store.since}: the counts are the last read (${s.store.error})` : "");
    document.body.dataset.drawn = String(Number(document.body.dataset.drawn || 0) + 1);
  } catch (e) {
    set("error", String(e));
    console.error(e);
  }
}
refresh();
setInterval(refresh, 2000);

package main

import (
	"encoding/json"
	"fmt"
	"html/template"
	"io"

	"riffle/merge/verdict"
	"riffle/proxy/status"
)

// reportPage is the HTML report: one self-contained file a team can attach
// to a promotion decision. The verdict, how it was reached, the numbers and
// the settings are plain HTML; the charts are drawn from the figures
// (embedded as JSON) by the same script and style as the live status page,
// inlined, so the file needs nothing else.
var reportPage = template.Must(template.New("report").Funcs(template.FuncMap{
	"delta":    func(x float64) string { return fmt.Sprintf("%+.3f", x) },
	"interval": formatInterval,
	"p":        formatP,
	"count":    group,
	"f3":       func(x float64) string { return fmt.Sprintf("%.3f", x) },
	"pct":      func(x float64) string { return fmt.Sprintf("%g%%", 100*x) },
}).Parse(`<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>riffle report: {{.S.Experiment}}</title>
<meta name="viewport" content="width=device-width, initial-scale=1">
<link rel="icon" href="data:,"><style>{{.CSS}}</style></head><body>
<header><h1>riffle report · {{.S.Experiment}}</h1>
<div class="meta">policy {{.S.Policy}} · {{.Stores}} read · {{count .S.Impressions}} impressions served, {{count .S.Interleaved}} interleaved</div></header>
<main>
<section id="verdict-section"><h2>Verdict</h2>
<div class="decision v-{{.S.Verdict}}"><div><span class="word" id="verdict">{{.S.Verdict}}</span></div>
<div id="reason">{{.S.Reason}}.</div>
<div>Δ {{delta .S.Delta}} · always-valid interval {{interval .S.CSDelta}} · always-valid p {{p .S.PValue}} (alpha {{.S.Alpha}}) · {{count .S.WithFeedback}} impressions with feedback from {{count .S.Users}} users</div>
<div id="how">{{if .F.DecisionPoint}}How it was reached: the always-valid test first left undecided ({{.F.DecisionPoint.Verdict}}) with the impressions served up to {{.F.DecisionPoint.Time.UTC.Format "2006-01-02 15:04:05"}} UTC, at {{count .F.DecisionPoint.WithFeedback}} impressions with feedback (p {{p .F.DecisionPoint.PValue}}, interval {{interval .F.DecisionPoint.CSDelta}}). The always-valid test may be looked at after every impression without inflating false decisions; the fixed-sample numbers below hold only at one planned look.{{else}}How it stands: the always-valid test has not left undecided at any point so far.{{end}}</div></div>
</section>
<section><h2>Δ over time</h2><div class="panels"><figure><figcaption>Δ, the preference for the challenger, over the impressions served</figcaption>
<svg id="chart-delta" width="820" height="300" role="img" aria-label="Delta over time"></svg>
<div class="legend"><span><i class="solid" style="border-color:var(--delta)"></i>Δ</span><span><i style="background:var(--band);opacity:.5"></i>always-valid interval (the verdict's)</span><span><i class="dash" style="border-color:var(--neutral)"></i>fixed-sample interval (one planned look only)</span></div>
<p class="note">Cumulative, computed from the store: each point is the statistics over the finalised impressions served up to its time. Above 0 users prefer the challenger's items.</p></figure></div></section>
<section><h2>Outcomes per day</h2><div class="panels"><figure><figcaption>Interleaved impressions per day (UTC) by outcome</figcaption>
<svg id="chart-days" width="640" height="240" role="img" aria-label="outcomes per day"></svg>
<div class="legend"><span><i style="background:var(--challenger)"></i>challenger won</span><span><i style="background:var(--incumbent)"></i>incumbent won</span><span><i style="background:var(--tie)"></i>tie</span><span><i style="background:var(--neutral)"></i>no feedback</span></div></figure>
<figure><figcaption>Feedback events by type</figcaption><svg id="chart-events" width="440" height="120" role="img" aria-label="events by type"></svg></figure></div></section>
<section><h2>Why: clicks and purchases by slot position</h2>
<p class="answer muted">Higher slots get more clicks whichever model filled them; interleaving shares the top slots between the models, so a difference within one position is the models' own.</p>
<div class="panels" id="positions"></div></section>
<section><h2>Users</h2><div class="panels"><figure><figcaption>Users by their impressions with feedback</figcaption>
<svg id="chart-users" width="560" height="230" role="img" aria-label="users by impressions with feedback"></svg>
<p class="note">Many impressions from few users widen the intervals: the variance is clustered by user (design effect {{f3 .S.DesignEffect}}).</p></figure></div></section>
<section><h2>Numbers</h2><table class="plain">
<tr><th>impressions served; interleaved; still inside their window</th><td>{{count .S.Impressions}}; {{count .S.Interleaved}}; {{count .F.Open}}</td></tr>
<tr><th>with feedback; finalised without</th><td>{{count .S.WithFeedback}}; {{count .S.NoFeedback}}</td></tr>
<tr><th>wins: challenger, incumbent, tie</th><td>{{count .S.Wins.Challenger}}, {{count .S.Wins.Incumbent}}, {{count .S.Wins.Tie}}</td></tr>
<tr><th>Δ</th><td>{{delta .S.Delta}}</td></tr>
<tr><th>always-valid interval for Δ (cs_delta)</th><td>{{interval .S.CSDelta}}</td></tr>
<tr><th>always-valid p-value (p_value)</th><td>{{p .S.PValue}}</td></tr>
<tr><th>fixed-sample interval for Δ (ci), one planned look</th><td>{{interval .S.CI}}</td></tr>
<tr><th>sign test p-value, ties set aside, one planned look</th><td>{{p .S.SignTest.PValue}}</td></tr>
<tr><th>challenger's win share; Wilson interval, one planned look</th><td>{{f3 .S.WinShare}}; [{{f3 (index .S.Wilson 0)}}, {{f3 (index .S.Wilson 1)}}]</td></tr>
<tr><th>users; design effect</th><td>{{count .S.Users}}; {{f3 .S.DesignEffect}}</td></tr>
<tr><th>still needed: always-valid; fixed-sample</th><td>{{count .S.Needed}}; {{count .S.NeededFixed}}</td></tr>
</table></section>
<section><h2>Settings and sources</h2><table class="plain" id="settings">
<tr><th>alpha (two-sided)</th><td>{{.F.Settings.Alpha}}</td></tr>
<tr><th>margin on Δ</th><td>{{.F.Settings.Margin}}</td></tr>
<tr><th>planned power; minimum detectable Δ</th><td>{{.F.Settings.Power}}; {{.F.Settings.MDE}}</td></tr>
<tr><th>interleaving policy</th><td>{{.F.Settings.Policy}}</td></tr>
<tr><th>attribution window</th><td>{{if .F.Settings.Window}}{{.F.Settings.Window}}{{else}}not given (pass --config){{end}}</td></tr>
<tr><th>event weights</th><td>{{range $k, $v := .F.Settings.Events}}{{$k}} {{$v}} {{else}}not given (pass --config){{end}}</td></tr>
<tr><th>stores read</th><td>{{.Stores}}</td></tr>
</table>
<p class="muted">A verdict is evidence, not a decision: check the guardrails, the business metrics and the cautions in riffle's README before promoting a model.</p></section>
</main>
<script type="application/json" id="figures">{{.Data}}</script>
<script>{{.JS}}</script>
<script>{{.Draw}}</script>
</body></html>
`))

// reportDraw draws the report's charts from the embedded figures.
const reportDraw = `"use strict";
(() => {
  const fig = JSON.parse(document.getElementById("figures").textContent);
  const F = riffleFormat, C = riffleChart;
  const css = n => getComputedStyle(document.documentElement).getPropertyValue(n).trim();
  const tl = fig.timeline.filter(p => p.with_feedback > 0);
  const t = p => Date.parse(p.time);
  const marks = fig.decision_point ? [{x: t(fig.decision_point), label: "first decided: " + fig.decision_point.verdict}] : [];
  C.line(document.getElementById("chart-delta"), {
    x: {time: true, label: "impressions served up to (UTC)"}, y: {label: "Δ (preference for the challenger)", fmt: F.delta, zero: "0: no preference"},
    bands: [{key: "cs_delta", cls: "band-main", color: css("--band"), points: tl.map(p => [t(p), p.cs_delta[0], p.cs_delta[1]])},
      {key: "ci", cls: "band-secondary", color: css("--neutral"), points: tl.map(p => [t(p), p.ci[0], p.ci[1]])}],
    series: [{key: "delta", color: css("--delta"), points: tl.map(p => [t(p), p.delta])}], marks, empty: "no outcomes with feedback",
  });
  const days = fig.days.map(d => d.date);
  const group = (key, color) => ({key, color, values: fig.days.map(d => d.outcomes[key] || 0)});
  C.bars(document.getElementById("chart-days"), {categories: days, x: {label: "day (UTC)"}, y: {label: "impressions", fmt: F.count}, labels: true,
    groups: [group("challenger", css("--challenger")), group("incumbent", css("--incumbent")), group("tie", css("--tie")), group("none", css("--neutral"))]});
  C.hbars(document.getElementById("chart-events"), {rows: Object.keys(fig.events).sort().map(k => ({label: k, value: fig.events[k], color: css("--neutral")})), x: {label: "events"}});
  const inc = fig.positions.incumbent || [], chal = fig.positions.challenger || [];
  const cats = Array.from({length: Math.max(inc.length, chal.length)}, (_, i) => String(i + 1));
  const types = Array.from(new Set([...Object.keys(fig.events), ...Object.keys(fig.settings.events || {})])).sort();
  const box = document.getElementById("positions");
  for (const ev of types) {
    const f = document.createElement("figure");
    f.innerHTML = '<figcaption></figcaption><svg width="520" height="230" role="img"></svg><div class="legend"><span><i style="background:var(--incumbent)"></i>incumbent\'s slots</span><span><i style="background:var(--challenger)"></i>challenger\'s slots</span></div>';
    f.querySelector("figcaption").textContent = ev + " rate by position, per model's slots";
    const svg = f.querySelector("svg"); svg.id = "chart-" + ev + "-positions"; svg.setAttribute("aria-label", ev + " rate by position");
    box.appendChild(f);
    const rate = l => cats.map((_, i) => l[i] && l[i].shown > 0 ? (l[i].events[ev] || 0) / l[i].shown : null);
    const notes = l => cats.map((_, i) => l[i] ? (l[i].events[ev] || 0) + " of " + l[i].shown + " slots" : "not shown");
    C.bars(svg, {categories: cats, x: {label: "slot position (1 = top)"}, y: {label: ev + " rate (% of slots)", fmt: v => F.pct(v)},
      groups: [{key: "incumbent", color: css("--incumbent"), values: rate(inc), notes: notes(inc)}, {key: "challenger", color: css("--challenger"), values: rate(chal), notes: notes(chal)}]});
  }
  C.bars(document.getElementById("chart-users"), {categories: fig.users_by_feedback.map(u => u.impressions), x: {label: "impressions with feedback per user"},
    y: {label: "users", fmt: F.count}, labels: true, groups: [{key: "users", color: css("--neutral"), values: fig.users_by_feedback.map(u => u.users)}]});
  document.body.dataset.drawn = "1";
})();
`

// reportView is what the template reads.
type reportView struct {
	S      verdict.Status
	F      reportFigures
	Stores string
	CSS    template.CSS
	JS     template.JS
	Draw   template.JS
	Data   template.JS
}

// writeReportHTML writes the report as one self-contained HTML page.
func writeReportHTML(w io.Writer, s verdict.Status, fig reportFigures) error {
	data, err := json.Marshal(reportBody{Status: s, reportFigures: fig})
	if err != nil {
		return fmt.Errorf("html report: %w", err)
	}
	return reportPage.Execute(w, reportView{S: s, F: fig, Stores: storesRead(fig.Stores),
		CSS: template.CSS(status.StyleSheet()), JS: template.JS(status.ChartScript()),
		Draw: template.JS(reportDraw), Data: template.JS(data)})
}

package main

import (
	"fmt"
	"html/template"
	"io"
	"math"
	"slices"

	"riffle/merge/verdict"
	"riffle/store"
)

// reportPage is the HTML report: the verdict, a table of the numbers, an
// interval plot of Delta (fixed-sample interval, always-valid interval,
// margin band) and the outcome counts, all as inline SVG so the page is
// one self-contained file.
var reportPage = template.Must(template.New("report").Funcs(template.FuncMap{
	"f4": func(x float64) string { return fmt.Sprintf("%+.4f", x) },
	"g4": func(x float64) string { return fmt.Sprintf("%.4g", x) },
}).Parse(`<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>riffle report: {{.S.Experiment}}</title>
<style>
body{font:14px/1.4 system-ui,sans-serif;margin:1.5rem;color:#1d2a1f}
table{border-collapse:collapse}td,th{border:1px solid #d9ded4;padding:.25rem .6rem;text-align:right}
th{background:#eef1ea;text-align:left}.v{font-size:1.2rem;font-weight:bold}
</style></head><body>
<h1>riffle report: {{.S.Experiment}}</h1>
<p>policy {{.S.Policy}} · {{.Stores}} store file(s) · alpha {{.S.Alpha}} · margin {{.S.Margin}}</p>
<p class="v" id="verdict">{{.S.Verdict}}</p><p id="reason">{{.S.Reason}}</p>
<h2>Delta and its intervals</h2>
<svg id="intervals" width="640" height="150" viewBox="0 0 640 150" role="img" aria-label="Delta with intervals">
{{if .MarginW}}<rect x="{{.MarginX}}" y="10" width="{{.MarginW}}" height="120" fill="#e3ecf7"/>{{end}}
<line x1="{{.Zero}}" x2="{{.Zero}}" y1="10" y2="130" stroke="#888" stroke-dasharray="4 3"/>
<text x="10" y="50" font-size="11">interval (1-alpha)</text>
<line id="ci" x1="{{.CILo}}" x2="{{.CIHi}}" y1="45" y2="45" stroke="#1b5e2b" stroke-width="3"/>
<text x="10" y="95" font-size="11">always-valid</text>
<line id="cs" x1="{{.CSLo}}" x2="{{.CSHi}}" y1="90" y2="90" stroke="#2c5aa0" stroke-width="3"/>
<circle id="delta" cx="{{.D}}" cy="45" r="5" fill="#1b5e2b"/><circle cx="{{.D}}" cy="90" r="5" fill="#2c5aa0"/>
<text x="{{.Lx}}" y="145" font-size="10">{{f4 .Lo}}</text><text x="{{.Zero}}" y="145" font-size="10">0</text><text x="{{.Hx}}" y="145" font-size="10" text-anchor="end">{{f4 .Hi}}</text>
</svg>
<h2>Outcomes</h2>
<svg id="outcomes" width="640" height="40" viewBox="0 0 640 40" role="img" aria-label="Outcome counts">
{{range .Bars}}<rect x="{{.X}}" y="5" width="{{.W}}" height="30" fill="{{.Color}}"><title>{{.Label}}: {{.N}}</title></rect>{{end}}
</svg>
<p>{{range .Bars}}<span style="color:{{.Color}}">■</span> {{.Label}} {{.N}} &nbsp; {{end}}</p>
<h2>Numbers</h2>
<table>
<tr><th>impressions</th><td>{{.S.Impressions}}</td></tr>
<tr><th>interleaved</th><td>{{.S.Interleaved}}</td></tr>
<tr><th>with feedback</th><td>{{.S.WithFeedback}}</td></tr>
<tr><th>Delta</th><td>{{f4 .S.Delta}}</td></tr>
<tr><th>interval for Delta (ci)</th><td>[{{f4 (index .S.CI 0)}}, {{f4 (index .S.CI 1)}}]</td></tr>
<tr><th>always-valid interval for Delta (cs_delta)</th><td>[{{f4 (index .S.CSDelta 0)}}, {{f4 (index .S.CSDelta 1)}}]</td></tr>
<tr><th>always-valid p-value (p_value)</th><td>{{g4 .S.PValue}}</td></tr>
<tr><th>sign test p-value, ties set aside (fixed sample)</th><td>{{g4 .S.SignTest.PValue}}</td></tr>
<tr><th>challenger win share, Wilson interval</th><td>{{g4 .S.WinShare}} [{{g4 (index .S.Wilson 0)}}, {{g4 (index .S.Wilson 1)}}]</td></tr>
<tr><th>users; design effect</th><td>{{.S.Users}}; {{g4 .S.DesignEffect}}</td></tr>
<tr><th>still needed (always-valid; fixed-sample)</th><td>{{.S.Needed}}; {{.S.NeededFixed}}</td></tr>
</table>
<h2>Impressions with feedback per user</h2>
<svg id="users" width="640" height="120" viewBox="0 0 640 120" role="img" aria-label="Impressions per user">
{{range .Hist}}<rect x="{{.X}}" y="{{.Y}}" width="{{.W}}" height="{{.H}}" fill="#8aa88f"><title>{{.Label}}: {{.N}} users</title></rect>{{end}}
</svg>
<p>Bars: users with 1, 2, 3-4, 5-8, 9-16, ... impressions with feedback. Many impressions from few users widen the intervals (design effect).</p>
</body></html>
`))

type bar struct {
	X, W  float64
	Color string
	Label string
	N     int64
}

type histBar struct {
	X, Y, W, H float64
	Label      string
	N          int
}

type reportView struct {
	S                   verdict.Status
	Stores              int
	Lo, Hi              float64
	Zero, D, CILo, CIHi float64
	CSLo, CSHi, Lx, Hx  float64
	MarginX, MarginW    float64
	Bars                []bar
	Hist                []histBar
}

// writeReportHTML writes the report as one self-contained HTML page.
func writeReportHTML(w io.Writer, s verdict.Status, agg store.Aggregate, stores int) error {
	v := reportView{S: s, Stores: stores}
	v.Lo = math.Min(-0.05, math.Min(s.CSDelta[0], -s.Margin)-0.01)
	v.Hi = math.Max(0.05, math.Max(s.CSDelta[1], s.Margin)+0.01)
	x := func(d float64) float64 { return 120 + (d-v.Lo)/(v.Hi-v.Lo)*500 }
	v.Zero, v.D, v.CILo, v.CIHi, v.CSLo, v.CSHi = x(0), x(s.Delta), x(s.CI[0]), x(s.CI[1]), x(s.CSDelta[0]), x(s.CSDelta[1])
	v.Lx, v.Hx = x(v.Lo), x(v.Hi)
	if s.Margin > 0 {
		v.MarginX, v.MarginW = x(-s.Margin), x(s.Margin)-x(-s.Margin)
	}
	total := s.Wins.Challenger + s.Wins.Incumbent + s.Wins.Tie + s.NoFeedback
	at := 0.0
	for _, b := range []bar{{Color: "#1b7f3b", Label: "challenger", N: s.Wins.Challenger}, {Color: "#b3261e", Label: "incumbent", N: s.Wins.Incumbent},
		{Color: "#c9a227", Label: "tie", N: s.Wins.Tie}, {Color: "#c8cec4", Label: "no feedback", N: s.NoFeedback}} {
		if total > 0 {
			b.X, b.W = at, 640*float64(b.N)/float64(total)
			at += b.W
		}
		v.Bars = append(v.Bars, b)
	}
	v.Hist = userHistogram(agg)
	return reportPage.Execute(w, v)
}

// userHistogram bins users by their impressions with feedback in powers of
// two: 1, 2, 3-4, 5-8, ...
func userHistogram(agg store.Aggregate) []histBar {
	var bins []int
	for _, c := range agg.Users {
		n := c[1] + c[2] + c[3]
		if n == 0 {
			continue
		}
		b := 0
		for lim := int64(1); n > lim; lim *= 2 {
			b++
		}
		for len(bins) <= b {
			bins = append(bins, 0)
		}
		bins[b]++
	}
	if len(bins) == 0 {
		return nil
	}
	top := slices.Max(bins)
	w := 620 / float64(len(bins))
	out := make([]histBar, len(bins))
	for i, n := range bins {
		h := 100 * float64(n) / float64(top)
		lo, hi := 1<<max(i-1, 0)+1, 1<<i
		if i == 0 {
			lo = 1
		}
		label := fmt.Sprintf("%d-%d", lo, hi)
		if lo == hi {
			label = fmt.Sprint(lo)
		}
		out[i] = histBar{X: 10 + float64(i)*w, Y: 110 - h, W: w * 0.9, H: h, Label: label, N: n}
	}
	return out
}

package report

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html/template"
	"os"
	"path/filepath"
	"strings"
)

// HTMLFile is the name of the readable report in a report folder.
const HTMLFile = "report.html"

// SafetyNote is printed near the top of every report.
const SafetyNote = "Safety: testing to failure throws splinters and drops weights. Wear eye protection, " +
	"keep hands and feet clear of the hanging load, and stop loading when a member cracks audibly " +
	"if your contest rules allow it. Real structures follow local codes and licensed engineers, not model tests."

// WriteHTML writes dir/report.html: one self-contained page (images embedded,
// no scripts, no outside links) with the failure account at the top, the
// safety note, then plots, evidence frames and tables. The figures named in
// r.Figures are read from dir. The file is written atomically.
func WriteHTML(dir string, r *Result) error {
	type fig struct {
		Figure
		Src template.URL
	}
	var plots, evidence []fig
	for _, f := range r.Figures {
		data, err := os.ReadFile(filepath.Join(dir, filepath.FromSlash(f.File)))
		if err != nil {
			return fmt.Errorf("write %s: embed %s: %w", HTMLFile, f.File, err)
		}
		mime := "image/png"
		if strings.HasSuffix(f.File, ".svg") {
			mime = "image/svg+xml"
		}
		src := template.URL("data:" + mime + ";base64," + base64.StdEncoding.EncodeToString(data))
		if f.Kind == "evidence" {
			evidence = append(evidence, fig{f, src})
		} else {
			plots = append(plots, fig{f, src})
		}
	}
	var buf bytes.Buffer
	err := pageTmpl.Execute(&buf, map[string]any{
		"R": r, "Safety": SafetyNote, "Plots": plots, "Evidence": evidence,
	})
	if err != nil {
		return fmt.Errorf("write %s: %w", HTMLFile, err)
	}
	return WriteFileAtomic(filepath.Join(dir, HTMLFile), buf.Bytes())
}

var pageTmpl = template.Must(template.New("page").Funcs(template.FuncMap{
	"g": func(p *float64) string {
		if p == nil {
			return "–"
		}
		return fmt.Sprintf("%.0f g", *p)
	},
	"f1": func(v float64) string { return fmt.Sprintf("%.1f", v) },
	"f2": func(v float64) string { return fmt.Sprintf("%.2f", v) },
	"f4": func(v float64) string { return fmt.Sprintf("%.4f", v) },
	"eff": func(p *float64) string {
		if p == nil {
			return "–"
		}
		return fmt.Sprintf("%.0f", *p)
	},
	"frame": func(v int) string {
		if v < 0 {
			return "–"
		}
		return fmt.Sprint(v)
	},
	"mode":  func(s string) string { return strings.ReplaceAll(s, "_", " ") },
	"deref": func(p *float64) float64 { return *p },
}).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Failure report: {{.R.Clip.Path}}</title>
<style>
body{font-family:system-ui,-apple-system,"Segoe UI",sans-serif;max-width:1100px;margin:1.5em auto;padding:0 1em;color:#1d232a;line-height:1.45}
h1{font-size:1.6em;margin-bottom:.2em}
h2{border-bottom:2px solid #d7dde3;padding-bottom:.2em;margin-top:1.8em}
.account{background:#eef5fb;border-left:6px solid #2f6fa3;padding:.8em 1em;font-size:1.1em}
.safety{background:#fff6e0;border-left:6px solid #d08b00;padding:.6em 1em}
.facts{display:grid;grid-template-columns:repeat(auto-fill,minmax(200px,1fr));gap:.5em;margin:1em 0}
.fact{background:#f5f7f9;padding:.5em .8em;border-radius:4px}
.fact b{display:block;font-size:1.3em}
figure{margin:1em 0}
figure img{max-width:100%;border:1px solid #d7dde3}
figcaption{font-size:.9em;color:#55606b}
.evidence{display:grid;grid-template-columns:repeat(auto-fill,minmax(320px,1fr));gap:1em}
table{border-collapse:collapse;margin:.8em 0;font-size:.92em}
th,td{border:1px solid #d7dde3;padding:.25em .6em;text-align:right;white-space:nowrap}
td.l{white-space:normal}
th{background:#f0f3f6}
td.l,th.l{text-align:left}
.warn li{color:#8a4b00}
footer{margin-top:2em;font-size:.85em;color:#6b7680}
</style>
</head>
<body>
<h1>How the tower failed</h1>
<p>Clip <code>{{.R.Clip.Path}}</code>, frames {{.R.Clip.FirstFrame}}–{{.R.Clip.LastFrame}} at {{.R.CaptureFPS}} fps ({{.R.CaptureFPSFrom}}).</p>
<div class="account" id="account"><p>{{.R.Account}}</p></div>
{{if .R.Advice}}<h3>For the next build</h3>
<ul id="advice">{{range .R.Advice}}<li>{{.}}</li>{{end}}</ul>{{end}}
<div class="facts">
<div class="fact">First member<b>{{if .R.FirstMember}}{{.R.FirstMember}}{{else}}undetermined{{end}}</b></div>
<div class="fact">Failure mode<b>{{mode .R.FailureMode}}</b></div>
<div class="fact">Peak load<b>{{g .R.PeakLoadG}}</b></div>
<div class="fact">Structure mass<b>{{if .R.MassG}}{{f1 (deref .R.MassG)}} g{{else}}–{{end}}</b></div>
<div class="fact">Efficiency (load / mass)<b>{{eff .R.Efficiency}}</b></div>
</div>
<p class="safety" id="safety">{{.Safety}}</p>
{{if .R.Warnings}}<h2>Warnings</h2>
<ul class="warn">{{range .R.Warnings}}<li>{{.}}</li>{{end}}</ul>{{end}}
{{if .Plots}}<h2>Plots</h2>
{{range .Plots}}<figure><img src="{{.Src}}" alt="{{.Caption}}"><figcaption>{{.Caption}}{{if .SVG}} (vector copy: <code>{{.SVG}}</code>){{end}}</figcaption></figure>
{{end}}{{end}}
{{if .Evidence}}<h2>Evidence frames</h2>
<div class="evidence">{{range .Evidence}}<figure><img src="{{.Src}}" alt="{{.Caption}}"><figcaption>{{.Caption}}</figcaption></figure>
{{end}}</div>{{end}}
<h2>Events</h2>
<table id="events"><tr><th class="l">Event</th><th class="l">Member</th><th>Frame</th><th>Time (s)</th><th>Load</th><th class="l">What was seen</th></tr>
{{range .R.Events}}<tr><td class="l">{{mode .Kind}}</td><td class="l">{{.Member}}</td><td>{{.Frame}}</td><td>{{f4 .TimeS}}</td><td>{{g .LoadG}}</td><td class="l">{{.Detail}}</td></tr>
{{else}}<tr><td class="l" colspan="6">No events found.</td></tr>{{end}}</table>
<h2>Levels</h2>
<table id="levels"><tr><th>Level</th><th>Max twist (°)</th><th>Max sway (mm)</th><th class="l">Note</th></tr>
{{range .R.Levels}}<tr><td>{{.Level}}</td><td>{{if .TwistObservable}}{{f2 .MaxTwistDeg}}{{else}}–{{end}}</td><td>{{f2 .MaxSwayMM}}</td><td class="l">{{.Note}}</td></tr>
{{end}}</table>
{{if .R.Members}}<h2>Members</h2>
<table id="members"><tr><th class="l">Member</th><th class="l">Kind</th><th>Length (mm)</th><th>Max bow (mm)</th><th>Max bow (% of length)</th><th>Max strain (%)</th><th>Onset frame</th><th>Break frame</th></tr>
{{range .R.Members}}<tr><td class="l">{{.ID}}</td><td class="l">{{.Kind}}</td><td>{{f1 .LengthMM}}</td><td>{{f2 .MaxBowMM}}</td><td>{{f2 .MaxBowPct}}</td><td>{{f2 .MaxStrainPct}}</td><td>{{frame .OnsetFrame}}</td><td>{{frame .BreakFrame}}</td></tr>
{{end}}</table>{{end}}
<h2>Load log and alignment</h2>
{{if .R.Alignment}}<p>Logger clock to video: video time = logger time + {{f4 .R.Alignment.OffsetS}} s (± {{f4 .R.Alignment.UncertaintyS}} s), method <b>{{.R.Alignment.Method}}</b>. {{.R.Alignment.Detail}}</p>{{else}}<p>No load log was lined up with the clip.</p>{{end}}
{{if .R.LoadLog}}<p>Load log <code>{{.R.LoadLog.Path}}</code>: {{.R.LoadLog.Detected}}.</p>{{end}}
<h2>Files</h2>
<ul>{{range .R.Files}}<li><code>{{.}}</code></li>{{end}}</ul>
<footer>Written by {{.R.Tool}} at {{.R.CreatedAt}}. Times are real times (frame / capture rate); loads are in grams.</footer>
</body>
</html>
`))

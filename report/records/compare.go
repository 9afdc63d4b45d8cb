package records

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html/template"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"text/tabwriter"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// CompareRow is one line of a comparison: a build and one of its tests
// (Test nil for a build not yet tested).
type CompareRow struct {
	// Build is the build record.
	Build Build
	// Test is the test shown; nil when the build has none.
	Test *Test
}

// Label names the row: the build id, with "#n" for its later tests.
func (r CompareRow) Label() string {
	if r.Test == nil {
		return r.Build.ID
	}
	return r.Test.Label()
}

// Efficiency is the test's efficiency, or nil.
func (r CompareRow) Efficiency() *float64 {
	if r.Test == nil {
		return nil
	}
	return r.Test.Efficiency
}

// MassG is the mass the test used, else the build's mass.
func (r CompareRow) MassG() float64 {
	if r.Test != nil && r.Test.MassG != nil {
		return *r.Test.MassG
	}
	return r.Build.MassG
}

// Compare returns the rows for the builds with the ids (in the order given),
// or with the tag, or all builds when both are empty. An unknown id is an
// *Error.
func (s *Store) Compare(ids []string, tag string) ([]CompareRow, error) {
	var builds []Build
	if len(ids) > 0 {
		seen := map[string]bool{}
		for _, id := range ids {
			if seen[id] {
				continue
			}
			seen[id] = true
			b, err := s.Get(id)
			if err != nil {
				return nil, err
			}
			builds = append(builds, *b)
		}
	} else {
		var err error
		if builds, err = s.List(tag); err != nil {
			return nil, err
		}
	}
	var rows []CompareRow
	for _, b := range builds {
		ts, err := s.Tests(b.ID)
		if err != nil {
			return nil, err
		}
		if len(ts) == 0 {
			rows = append(rows, CompareRow{Build: b})
		}
		for i := range ts {
			rows = append(rows, CompareRow{Build: b, Test: &ts[i]})
		}
	}
	return rows, nil
}

func fmtOpt(p *float64, prec int) string {
	if p == nil {
		return "-"
	}
	return strconv.FormatFloat(*p, 'f', prec, 64)
}

func orDash(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

// WriteCompareTable writes the rows as an aligned text table.
func WriteCompareTable(w io.Writer, rows []CompareRow) error {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "TEST\tBRACING\tMASS_G\tPEAK_LOAD_G\tEFFICIENCY\tFAILURE_MODE\tFIRST_MEMBER")
	for _, r := range rows {
		var peak *float64
		mode, first := "untested", ""
		if r.Test != nil {
			peak, mode, first = r.Test.PeakLoadG, r.Test.FailureMode, r.Test.FirstMember
		}
		fmt.Fprintf(tw, "%s\t%s\t%.2f\t%s\t%s\t%s\t%s\n", r.Label(), r.Build.Bracing, r.MassG(),
			fmtOpt(peak, 0), fmtOpt(r.Efficiency(), 1), orDash(mode), orDash(first))
	}
	return tw.Flush()
}

// ComparePage renders the rows as a self-contained HTML page: the table and
// three plots (efficiency by build, efficiency against mass, failure modes by
// bracing pattern) embedded as PNG images.
func ComparePage(rows []CompareRow, title string) ([]byte, error) {
	type img struct {
		Title, Note string
		Src         template.URL
	}
	var imgs []img
	for _, p := range []struct {
		title string
		make  func([]CompareRow) (*plot.Plot, string, error)
	}{
		{"Efficiency by build", plotEfficiencyByBuild},
		{"Efficiency against mass", plotEfficiencyVsMass},
		{"Failure modes by bracing pattern", plotModesByBracing},
	} {
		pl, note, err := p.make(rows)
		if err != nil {
			return nil, fmt.Errorf("plot %s: %w", p.title, err)
		}
		im := img{Title: p.title, Note: note}
		if pl != nil {
			var buf bytes.Buffer
			wt, err := pl.WriterTo(16*vg.Centimeter, 10*vg.Centimeter, "png")
			if err != nil {
				return nil, fmt.Errorf("plot %s: %w", p.title, err)
			}
			if _, err := wt.WriteTo(&buf); err != nil {
				return nil, fmt.Errorf("plot %s: %w", p.title, err)
			}
			im.Src = template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(buf.Bytes()))
		}
		imgs = append(imgs, im)
	}
	var table bytes.Buffer
	type row struct {
		Label, Bracing, Mass, Peak, Eff, Mode, First string
	}
	var trs []row
	for _, r := range rows {
		var peak *float64
		mode, first := "untested", ""
		if r.Test != nil {
			peak, mode, first = r.Test.PeakLoadG, r.Test.FailureMode, r.Test.FirstMember
		}
		trs = append(trs, row{r.Label(), r.Build.Bracing, strconv.FormatFloat(r.MassG(), 'f', 2, 64),
			fmtOpt(peak, 0), fmtOpt(r.Efficiency(), 1), orDash(mode), orDash(first)})
	}
	err := pageTmpl.Execute(&table, map[string]any{
		"Title": title, "Rows": trs, "Images": imgs, "When": now().Format(time.RFC3339),
	})
	if err != nil {
		return nil, err
	}
	return table.Bytes(), nil
}

// ComparePageFile is the page's name inside the output folder.
const ComparePageFile = "compare.html"

// WriteComparePage writes dir/compare.html atomically and returns its path.
func WriteComparePage(dir string, rows []CompareRow, title string) (string, error) {
	page, err := ComparePage(rows, title)
	if err != nil {
		return "", err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", fmt.Errorf("create %s: %w", dir, err)
	}
	p := filepath.Join(dir, ComparePageFile)
	err = writeAtomic(p, func(w io.Writer) error {
		_, err := w.Write(page)
		return err
	})
	return p, err
}

var pageTmpl = template.Must(template.New("page").Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{{.Title}}</title>
<style>
body{font-family:sans-serif;margin:1.5em;max-width:60em;color:#222}
table{border-collapse:collapse;margin:1em 0}
th,td{border:1px solid #bbb;padding:.25em .6em;text-align:left}
td.n{text-align:right}
figure{margin:1.5em 0}
figcaption{font-weight:bold;margin-bottom:.4em}
img{max-width:100%;border:1px solid #ddd}
.note{color:#666;font-style:italic}
</style></head><body>
<h1>{{.Title}}</h1>
<p>Efficiency = peak load held (g) / structure mass (g). Written {{.When}}.</p>
<table>
<tr><th>Test</th><th>Bracing</th><th>Mass (g)</th><th>Peak load (g)</th><th>Efficiency</th><th>Failure mode</th><th>First member</th></tr>
{{range .Rows}}<tr><td>{{.Label}}</td><td>{{.Bracing}}</td><td class="n">{{.Mass}}</td><td class="n">{{.Peak}}</td><td class="n">{{.Eff}}</td><td>{{.Mode}}</td><td>{{.First}}</td></tr>
{{end}}</table>
{{range .Images}}<figure><figcaption>{{.Title}}</figcaption>
{{if .Src}}<img alt="{{.Title}}" src="{{.Src}}">{{end}}{{if .Note}}<p class="note">{{.Note}}</p>{{end}}
</figure>
{{end}}</body></html>
`))

// withEfficiency returns the rows that have an efficiency.
func withEfficiency(rows []CompareRow) []CompareRow {
	var out []CompareRow
	for _, r := range rows {
		if e := r.Efficiency(); e != nil && !math.IsNaN(*e) {
			out = append(out, r)
		}
	}
	return out
}

const noEfficiency = "No test here has an efficiency (attach reports made with a load log and a mass)."

func plotEfficiencyByBuild(rows []CompareRow) (*plot.Plot, string, error) {
	rs := withEfficiency(rows)
	if len(rs) == 0 {
		return nil, noEfficiency, nil
	}
	vals := make(plotter.Values, len(rs))
	names := make([]string, len(rs))
	for i, r := range rs {
		vals[i], names[i] = *r.Efficiency(), r.Label()
	}
	p := plot.New()
	p.Title.Text = "Efficiency by build"
	p.Y.Label.Text = "efficiency (load g / mass g)"
	bars, err := plotter.NewBarChart(vals, vg.Points(20))
	if err != nil {
		return nil, "", err
	}
	bars.Color = plotutil.Color(0)
	p.Add(bars)
	p.NominalX(names...)
	p.X.Min, p.X.Max = -0.6, float64(len(names))-0.4
	p.Y.Min = 0
	p.Y.Max = maxOf(vals) * 1.1
	return p, "", nil
}

func plotEfficiencyVsMass(rows []CompareRow) (*plot.Plot, string, error) {
	rs := withEfficiency(rows)
	if len(rs) == 0 {
		return nil, noEfficiency, nil
	}
	lab := plotter.XYLabels{XYs: make(plotter.XYs, len(rs)), Labels: make([]string, len(rs))}
	for i, r := range rs {
		lab.XYs[i].X, lab.XYs[i].Y, lab.Labels[i] = r.MassG(), *r.Efficiency(), " "+r.Label()
	}
	p := plot.New()
	p.Title.Text = "Efficiency against mass"
	p.X.Label.Text = "structure mass (g)"
	p.Y.Label.Text = "efficiency (load g / mass g)"
	sc, err := plotter.NewScatter(lab)
	if err != nil {
		return nil, "", err
	}
	sc.GlyphStyle.Color = plotutil.Color(1)
	sc.GlyphStyle.Radius = vg.Points(3.5)
	sc.GlyphStyle.Shape = draw.CircleGlyph{}
	labels, err := plotter.NewLabels(lab)
	if err != nil {
		return nil, "", err
	}
	p.Add(sc, labels)
	var xs, ys plotter.Values
	for _, xy := range lab.XYs {
		xs, ys = append(xs, xy.X), append(ys, xy.Y)
	}
	p.X.Min, p.Y.Min = 0, 0
	p.X.Max, p.Y.Max = maxOf(xs)*1.2, maxOf(ys)*1.1
	return p, "", nil
}

func plotModesByBracing(rows []CompareRow) (*plot.Plot, string, error) {
	counts := map[string]map[string]float64{} // mode -> bracing -> n
	bset, mset := map[string]bool{}, map[string]bool{}
	for _, r := range rows {
		if r.Test == nil {
			continue
		}
		mode := r.Test.FailureMode
		if mode == "" {
			mode = "undetermined"
		}
		if counts[mode] == nil {
			counts[mode] = map[string]float64{}
		}
		counts[mode][r.Build.Bracing]++
		bset[r.Build.Bracing], mset[mode] = true, true
	}
	if len(counts) == 0 {
		return nil, "No tested builds to count.", nil
	}
	var bracings, modes []string
	for _, b := range Bracings {
		if bset[b] {
			bracings = append(bracings, b)
		}
	}
	for m := range mset {
		modes = append(modes, m)
	}
	sort.Strings(modes)
	p := plot.New()
	p.Title.Text = "Failure modes by bracing pattern"
	p.Y.Label.Text = "tests"
	var below *plotter.BarChart
	for i, m := range modes {
		vals := make(plotter.Values, len(bracings))
		for j, b := range bracings {
			vals[j] = counts[m][b]
		}
		bars, err := plotter.NewBarChart(vals, vg.Points(30))
		if err != nil {
			return nil, "", err
		}
		bars.Color = plotutil.Color(i)
		bars.LineStyle.Color = color.Black
		if below != nil {
			bars.StackOn(below)
		}
		below = bars
		p.Add(bars)
		p.Legend.Add(m, bars)
	}
	p.Legend.Top = true
	p.NominalX(bracings...)
	p.X.Min, p.X.Max = -0.6, float64(len(bracings))-0.4
	var most float64
	for _, b := range bracings {
		var n float64
		for _, m := range modes {
			n += counts[m][b]
		}
		most = math.Max(most, n)
	}
	p.Y.Min = 0
	// Room above the bars for the legend, one line per mode.
	p.Y.Max = most * (1.15 + 0.12*float64(len(modes)))
	return p, "", nil
}

// maxOf returns the largest value (0 for none).
func maxOf(vs plotter.Values) float64 {
	m := 0.0
	for _, v := range vs {
		m = math.Max(m, v)
	}
	return m
}

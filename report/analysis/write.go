package analysis

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/report/align"
	"github.com/failframe/failframe/report/evidence"
	"github.com/failframe/failframe/report/loadlog"
	"github.com/failframe/failframe/report/plots"
	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/measure"
	"github.com/failframe/failframe/tracking/tracks"
)

// writer fills the temporary report folder.
type writer struct {
	dir    string
	res    *report.Result
	m      *marks.File
	tr     *tracks.Tracks
	meas   *measure.Result
	diag   *measure.Diagnosis
	tb     capture.Timebase
	log    *loadlog.Log
	al     *align.Result
	energy []float64
	files  []string
	charts []namedChart // listed by plot, drawn by drawPlots
}

// num formats a CSV number: empty for NaN, otherwise at most 6 decimals.
func num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(round(v, 6), 'f', -1, 64)
}

func at(x []float64, i int) float64 {
	if i < len(x) {
		return x[i]
	}
	return math.NaN()
}

// csv writes one CSV file through fill.
func (w *writer) csv(name string, fill func(b *bufio.Writer) error) error {
	f, err := os.Create(filepath.Join(w.dir, name))
	if err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	b := bufio.NewWriter(f)
	err = fill(b)
	if err == nil {
		err = b.Flush()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	w.files = append(w.files, name)
	return nil
}

func (w *writer) csvs() error {
	mmpp := w.meas.MMPerPx
	if err := w.csv("points.csv", func(b *bufio.Writer) error {
		if w.tr.Ref == nil {
			// mm are relative to the marked reference positions.
			ref := make([][2]float64, len(w.tr.IDs))
			for j, id := range w.tr.IDs {
				p, _ := w.m.Point(id)
				ref[j] = p.PX
			}
			w.tr.Ref = ref
		}
		return tracks.WriteCSV(b, w.tr, w.tb.CaptureFPS, mmpp)
	}); err != nil {
		return err
	}
	if err := w.csv("levels.csv", func(b *bufio.Writer) error {
		fmt.Fprintln(b, "frame,time_s,level,twist_deg,sway_mm,settle_mm")
		for i, f := range w.meas.Frames {
			for _, l := range w.meas.Levels {
				tw := at(l.TwistDeg, i)
				if !l.Observable {
					tw = math.NaN()
				}
				fmt.Fprintf(b, "%d,%s,%d,%s,%s,%s\n", f, num(w.tb.Time(f)), l.Level, num(tw), num(at(l.SwayMM, i)), num(at(l.SettleMM, i)))
			}
		}
		return nil
	}); err != nil {
		return err
	}
	if err := w.csv("members.csv", func(b *bufio.Writer) error {
		fmt.Fprintln(b, "frame,time_s,member,kind,bow_mm,bow_pct,strain_pct,rotation_deg")
		for i, f := range w.meas.Frames {
			for _, m := range w.meas.Members {
				fmt.Fprintf(b, "%d,%s,%s,%s,%s,%s,%s,%s\n", f, num(w.tb.Time(f)), m.ID, m.Kind, num(at(m.BowMM, i)), num(100*at(m.BowFrac, i)), num(at(m.StrainPct, i)), num(at(m.RotationDeg, i)))
			}
		}
		return nil
	}); err != nil {
		return err
	}
	if err := w.csv("energy.csv", func(b *bufio.Writer) error {
		fmt.Fprintln(b, "frame,time_s,energy")
		for i, f := range w.tr.Frames {
			fmt.Fprintf(b, "%d,%s,%s\n", f, num(w.tb.Time(f)), num(w.energy[i]))
		}
		return nil
	}); err != nil {
		return err
	}
	if w.log == nil {
		return nil
	}
	return w.csv("load.csv", func(b *bufio.Writer) error {
		fmt.Fprintln(b, "log_time_s,video_time_s,frame,load_g")
		first, last := w.tr.Frames[0], w.tr.Frames[w.tr.Len()-1]
		for i, t := range w.log.TimesS {
			vt, frame := "", ""
			if w.al != nil {
				v := t + w.al.OffsetS
				vt = num(v)
				if f := w.tb.Frame(v); f >= first && f <= last {
					frame = strconv.Itoa(f)
				}
			}
			fmt.Fprintf(b, "%s,%s,%s,%s\n", num(t), vt, frame, num(w.log.LoadG[i]))
		}
		return nil
	})
}

// plot saves a chart into plots/ and records it as a figure.
// plot adds a chart to the report: its files and figure are listed now, in
// page order, and it is drawn by drawPlots.
func (w *writer) plot(c plots.Chart, name, caption string) error {
	w.charts = append(w.charts, namedChart{c, name})
	png, svg := "plots/"+name+".png", "plots/"+name+".svg"
	w.files = append(w.files, png, svg)
	w.res.Figures = append(w.res.Figures, report.Figure{File: png, SVG: svg, Kind: "plot", Caption: caption})
	return nil
}

// namedChart is a chart waiting to be drawn into plots/name.png and .svg.
type namedChart struct {
	plots.Chart
	name string
}

// drawPlots draws the charts listed by plot, on up to workers goroutines.
func (w *writer) drawPlots(workers int) error {
	jobs := make(chan namedChart)
	errs := make(chan error, len(w.charts))
	var wg sync.WaitGroup
	for i := 0; i < max(1, workers); i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for c := range jobs {
				files, err := c.Save(filepath.Join(w.dir, "plots"), c.name)
				if err == nil && (len(files) != 2 || files[0] != c.name+".png" || files[1] != c.name+".svg") {
					err = fmt.Errorf("plot %s wrote %v", c.name, files)
				}
				if err != nil {
					errs <- fmt.Errorf("write report: %w", err)
				}
			}
		}()
	}
	for _, c := range w.charts {
		jobs <- c
	}
	close(jobs)
	wg.Wait()
	close(errs)
	return <-errs // nil when none
}

func (w *writer) eventMarks(kinds ...string) []plots.Mark {
	var out []plots.Mark
	for _, e := range w.res.Events {
		ok := len(kinds) == 0
		for _, k := range kinds {
			ok = ok || e.Kind == k
		}
		if !ok {
			continue
		}
		label := strings.ReplaceAll(e.Kind, "_", " ")
		if e.Member != "" && e.Kind != "lost" {
			label += " " + e.Member
		}
		strong := e.Member != "" && e.Member == w.res.FirstMember || e.Kind == "collapse"
		out = append(out, plots.Mark{X: e.TimeS, Label: label, Strong: strong})
	}
	return out
}

func (w *writer) frameTimes() []float64 {
	t := make([]float64, len(w.meas.Frames))
	for i, f := range w.meas.Frames {
		t[i] = w.tb.Time(f)
	}
	return t
}

func (w *writer) plots() error {
	times := w.frameTimes()
	evMarks := w.eventMarks("onset", "break", "twist_onset", "collapse")
	if w.log != nil {
		off, xl := 0.0, "logger time (s)"
		if w.al != nil {
			off, xl = w.al.OffsetS, "real time in the clip (s)"
		}
		var all plots.Series
		all.Name = "load"
		var clip plots.Series
		clip.Name = "load"
		t0, t1 := times[0], times[len(times)-1]
		for i, t := range w.log.TimesS {
			x := t + off
			all.X = append(all.X, x)
			all.Y = append(all.Y, w.log.LoadG[i])
			if x >= t0-0.05*(t1-t0) && x <= t1+0.05*(t1-t0) {
				clip.X = append(clip.X, x)
				clip.Y = append(clip.Y, w.log.LoadG[i])
			}
		}
		var testMarks []plots.Mark
		if w.al != nil {
			testMarks = []plots.Mark{{X: t0, Label: "clip starts"}, {X: t1, Label: "clip ends"}}
		}
		if err := w.plot(plots.Chart{Title: "Load over the whole test", XLabel: xl, YLabel: "load (g)", Series: []plots.Series{all}, Marks: testMarks},
			"load_test", "Load over the whole test as logged"+alignedNote(w.al)); err != nil {
			return err
		}
		if w.al != nil {
			if err := w.plot(plots.Chart{Title: "Load during the clip", XLabel: xl, YLabel: "load (g)", Series: []plots.Series{{Name: "load", X: clip.X, Y: clip.Y, Dots: true}}, Marks: evMarks},
				"load", "Load during the clip with the failure events marked (red: the first member and the collapse)"); err != nil {
				return err
			}
		}
	}
	// Motion plots stop shortly after the collapse: what follows is the
	// tower falling, and its scale would flatten the build-up.
	cut := len(times)
	if c := w.diag.CollapseRow; c >= 0 {
		cut = min(len(times), c+max(5, len(times)/50)+1)
	}
	ct := times[:cut]
	head := func(y []float64) []float64 { return y[:min(cut, len(y))] }
	after := ""
	if cut < len(times) {
		after = ", up to just after the collapse"
	}
	var tw, sw []plots.Series
	faceOnly := false
	for _, l := range w.meas.Levels {
		name := fmt.Sprintf("level %d", l.Level)
		if l.Observable {
			tw = append(tw, plots.Series{Name: name, X: ct[:len(head(l.TwistDeg))], Y: head(l.TwistDeg)})
		}
		if !l.Observable {
			// Twist unseen: the number is the front face's sideways motion,
			// twist not separated (see the level's note), not true sway.
			faceOnly = true
		}
		sw = append(sw, plots.Series{Name: name, X: ct[:len(head(l.SwayMM))], Y: head(l.SwayMM)})
	}
	swTitle, swY := "Sway per level", "sway (mm, to the image right)"
	swCaption := "Sideways sway of each level's centre"
	if faceOnly {
		allFace := len(tw) == 0
		for i, l := range w.meas.Levels {
			if !l.Observable && !allFace {
				sw[i].Name += " (face only)"
			}
		}
		if allFace {
			swTitle, swY = "Front face sideways motion per level (twist not separated)", "sideways motion (mm, to the image right)"
		}
		swCaption += "; where this camera cannot see a level's twist, the line is the sideways motion of the face toward the camera, with any twist not separated from it"
	}
	if len(tw) > 0 {
		if err := w.plot(plots.Chart{Title: "Twist per level", XLabel: "real time (s)", YLabel: "twist (degrees, counter-clockwise from above)", Series: tw, Marks: evMarks, LegendLeft: true},
			"twist", "Twist of each level whose twist this camera can see"+after); err != nil {
			return err
		}
	}
	if len(sw) > 0 {
		if err := w.plot(plots.Chart{Title: swTitle, XLabel: "real time (s)", YLabel: swY, Series: sw, Marks: evMarks, LegendLeft: true},
			"sway", swCaption+after); err != nil {
			return err
		}
	}
	bow := bowSeries(w.meas.Members, w.res.FirstMember, ct, head)
	if len(bow) > 0 {
		if err := w.plot(plots.Chart{Title: "Bow of each brace", XLabel: "real time (s)", YLabel: "bow (% of length)", Series: bow, Marks: w.eventMarks("onset", "break"), LegendLeft: true},
			"bow", fmt.Sprintf("Bow of each brace (sideways deflection of its middle as a share of its length) with member onsets and breaks marked; coloured: the first member and the %d braces that bowed most, grey: the others", bowColoured)+after); err != nil {
			return err
		}
	}
	if w.al != nil {
		top := -1
		for i, l := range w.meas.Levels {
			if l.Observable {
				top = i
			}
		}
		if top >= 0 {
			end := collapseRow(w.meas, w.diag)
			var s plots.Series
			s.Name = fmt.Sprintf("level %d", w.meas.Levels[top].Level)
			for i := 0; i < end && i < len(times); i++ {
				g, ok := w.log.At(times[i] - w.al.OffsetS)
				if !ok {
					continue
				}
				s.X = append(s.X, at(w.meas.Levels[top].TwistDeg, i))
				s.Y = append(s.Y, g)
			}
			if len(s.X) > 1 {
				if err := w.plot(plots.Chart{Title: "Load against top twist", XLabel: "twist (degrees)", YLabel: "load (g)", Series: []plots.Series{s}},
					"load_twist", "Load against the twist of the highest level whose twist is seen, up to the collapse"); err != nil {
					return err
				}
			}
		}
	}
	return w.legShape()
}

func alignedNote(al *align.Result) string {
	if al == nil {
		return " (not lined up with the clip)"
	}
	return fmt.Sprintf(" on the clip's time scale (offset %.4f s, %s)", al.OffsetS, al.Method)
}

// legShape plots the deflected shape of the leg that bent most at a few instants.
func (w *writer) legShape() error {
	best, bestV := -1, 0.0
	for i, l := range w.meas.Legs {
		if l.Row < 0 || l.Row >= len(l.DeflectionMM) {
			continue
		}
		v, _ := maxAbs(l.DeflectionMM[l.Row], len(l.DeflectionMM[l.Row]))
		if best < 0 || v > bestV {
			best, bestV = i, v
		}
	}
	if best < 0 {
		for i, l := range w.meas.Legs {
			if len(l.DeflectionMM) > 0 {
				best = i
				break
			}
		}
	}
	if best < 0 {
		return nil
	}
	leg := w.meas.Legs[best]
	rows := []int{0}
	labels := []string{"reference"}
	for _, e := range w.diag.Events {
		if e.Kind == "onset" || e.Kind == "break" || e.Kind == "collapse" {
			r := e.Row
			if e.Kind != "onset" && r > 0 {
				r-- // just before
			}
			rows = append(rows, r)
			labels = append(labels, fmt.Sprintf("before %s %s", strings.ReplaceAll(e.Kind, "_", " "), e.Member))
			if e.Kind == "onset" {
				labels[len(labels)-1] = "onset " + e.Member
			}
		}
	}
	if leg.Row >= 0 {
		rows = append(rows, leg.Row)
		labels = append(labels, "largest bend")
	}
	var ss []plots.Series
	seen := map[int]bool{}
	for k, r := range rows {
		if r < 0 || r >= len(leg.DeflectionMM) || seen[r] || len(ss) >= 5 {
			continue
		}
		seen[r] = true
		ss = append(ss, plots.Series{Name: fmt.Sprintf("%s (frame %d)", strings.TrimSpace(labels[k]), w.meas.Frames[r]), X: leg.DeflectionMM[r], Y: leg.HeightsMM, Dots: true})
	}
	return w.plot(plots.Chart{Title: "Deflected shape of leg " + leg.Leg, XLabel: "deflection from the straight line (mm)", YLabel: "height (mm)", Series: ss, HeightCM: 11},
		"leg_shape", fmt.Sprintf("Deflected shape of leg %s at a few instants (%s)", leg.Leg, leg.Note))
}

// eventFrame returns the frame of the first event of a kind (for member, or any member when ""), -1 when none.
func (w *writer) eventFrame(kind, member string) int {
	for _, e := range w.res.Events {
		if e.Kind == kind && (member == "" || e.Member == member) {
			return e.Frame
		}
	}
	return -1
}

// evidence renders the evidence frames from those kept during the pass
// (kept may be nil), reading the clip again only for frames it lacks; it
// only reads w, so it may run beside csvs and plots.
func (w *writer) evidence(src capture.Source, have map[int]gocv.Mat, kept *evidence.Keeper) ([]evidence.Written, error) {
	first, last := w.tr.Frames[0], w.tr.Frames[w.tr.Len()-1]
	fm := w.res.FirstMember
	// pick returns frame f, or, when reading it again would mean decoding
	// from a key frame, the nearest frame kept within half the sparse
	// spacing.
	intra := src.Info().IntraOnly
	pick := func(f int) int {
		if kept == nil || intra || kept.Has(f) {
			return f
		}
		if n, ok := kept.Nearest(f, kept.Policy().Every/2); ok && n >= first && n <= last {
			return n
		}
		return f
	}
	onset := w.eventFrame("onset", fm)
	onsetWhat := nonEmpty(fm, "the twist")
	if onset < 0 {
		onset = w.eventFrame("twist_onset", "")
	}
	brk := w.eventFrame("break", fm)
	col := w.eventFrame("collapse", "")
	var shots []evidence.Shot
	ref := w.m.ReferenceFrame
	if ref < first || ref > last {
		ref = first
	}
	shots = append(shots, evidence.Shot{Frame: ref, File: "reference.png", Caption: fmt.Sprintf("Reference frame %d: the marked points and members", ref)})
	if onset >= 0 {
		f := pick(onset)
		caption := fmt.Sprintf("Frame %d: onset of %s", f, onsetWhat)
		if f != onset {
			caption = fmt.Sprintf("Frame %d: %s the onset of %s (frame %d)", f, framesAway(f-onset), onsetWhat, onset)
		}
		shots = append(shots, evidence.Shot{Frame: f, File: "onset.png", Caption: caption})
	}
	if brk >= 0 {
		k := 3
		if onset >= 0 && brk-onset < 2*k {
			k = max(1, (brk-onset)/2)
		}
		if pre := pick(brk - k); pre > onset && pre < brk && pre >= first {
			shots = append(shots, evidence.Shot{Frame: pre, File: "before_break.png", Caption: fmt.Sprintf("Frame %d: just before %s breaks", pre, fm)})
		}
		shots = append(shots, evidence.Shot{Frame: brk, File: "break.png", Caption: fmt.Sprintf("Frame %d: %s breaks", brk, fm)})
	}
	if col >= 0 {
		shots = append(shots, evidence.Shot{Frame: col, File: "collapse.png", Caption: fmt.Sprintf("Frame %d: the tower collapses", col)})
	}
	// The failure window: from the first member's onset (else the first
	// member event, else the twist onset) to the collapse (else the last
	// event), at most maxWindowFrames long, so that the frames read again stay few.
	ws, we := onset, col
	for _, e := range w.res.Events {
		if ws < 0 && (e.Kind == "onset" || e.Kind == "break") {
			ws = e.Frame
		}
		if col < 0 && e.Kind != "lost" && e.Frame > we {
			we = e.Frame
		}
	}
	if ws < 0 {
		ws = w.eventFrame("twist_onset", "")
	}
	if we < 0 || ws < 0 || ws > we {
		ws, we = first+(last-first)*2/3, last
	}
	if we-ws > maxWindowFrames {
		ws = we - maxWindowFrames
	}
	// A little after the collapse, nothing before the onset: reading starts
	// at the keyframe before ws, so every frame before it costs decoding.
	pad := max(5, (we-ws)/10)
	ws, we = max(first, ws), min(last, we+pad)
	var sheet []int
	n := min(12, we-ws+1)
	for i := 0; i < n; i++ {
		f := pick(ws + int(math.Round(float64(i)*float64(we-ws)/math.Max(1, float64(n-1)))))
		if len(sheet) == 0 || f > sheet[len(sheet)-1] {
			sheet = append(sheet, f)
		}
	}
	// The clip: the last part of the window, at most maxClipFrames long; or,
	// where the frames kept during the pass cover a good part of the window
	// without a gap, that run (no second read of the clip).
	cs := max(ws, we-maxClipFrames+1)
	if kept != nil {
		if a, b := keptRun(kept, ws, we); b-a+1 >= min(minKeptClip, we-ws+1) {
			cs, we = max(a, b-maxClipFrames+1), b
		}
	}
	eventAt := map[int]string{}
	for _, e := range w.res.Events {
		label := strings.ReplaceAll(e.Kind, "_", " ")
		if e.Member != "" && e.Kind != "lost" {
			label += " " + e.Member
		}
		if eventAt[e.Frame] == "" {
			eventAt[e.Frame] = label
		}
	}
	stamp := func(f int) string {
		s := fmt.Sprintf("frame %d  t = %.4f s", f, w.tb.Time(f))
		if w.al != nil {
			if g, ok := w.log.At(w.tb.Time(f) - w.al.OffsetS); ok {
				s += fmt.Sprintf("  load = %.0f g", g)
			}
		}
		if l := eventAt[f]; l != "" {
			s += "  " + l
		}
		return s
	}
	bow := map[string][]float64{}
	for _, m := range w.meas.Members {
		bow[m.ID] = m.BowFrac
	}
	ov := &evidence.Overlay{Marks: w.m, Tracks: w.tr, BowFrac: bow, FirstMember: fm, Width: w.res.Clip.Width}
	req := evidence.Request{Shots: shots, Sheet: sheet, ClipFrom: cs, ClipTo: we, ClipFPS: 30, Stamp: stamp, Have: have,
		Kept: kept, Size: evidence.Size(w.res.Clip.Width, w.res.Clip.Height)}
	return evidence.Render(src, ov, req, filepath.Join(w.dir, "evidence"))
}

// minKeptClip is the shortest run of kept frames the failure clip is made
// from instead of reading the clip again.
const minKeptClip = 40

// keptRun returns the longest run of consecutive kept frames within [from,
// to] (the later of equal runs); b < a when none.
func keptRun(k *evidence.Keeper, from, to int) (a, b int) {
	a, b = 0, -1
	start := -1
	for f := from; f <= to+1; f++ {
		if f <= to && k.Has(f) {
			if start < 0 {
				start = f
			}
			continue
		}
		if start >= 0 && f-1-start >= b-a {
			a, b = start, f-1
		}
		start = -1
	}
	return a, b
}

// framesAway says how far frame offset d lies from an event: "2 frames
// after", "1 frame before".
func framesAway(d int) string {
	word := "after"
	if d < 0 {
		word, d = "before", -d
	}
	if d == 1 {
		return "1 frame " + word
	}
	return fmt.Sprintf("%d frames %s", d, word)
}

// maxWindowFrames bounds the failure window of the contact sheet.
const maxWindowFrames = 600

// maxClipFrames bounds the annotated failure clip; the frames kept during
// the pass hold a dense run a little longer than that.
const maxClipFrames = 120

func nonEmpty(s, alt string) string {
	if s == "" {
		return alt
	}
	return s
}

// bowColoured is how many braces, besides the first member, get a colour and
// a legend entry in the bow plot; the rest are drawn grey behind them.
const bowColoured = 4

// bowSeries returns the bow plot's lines: every brace (and the first member),
// the first member and the braces with the largest bow before the cut in
// colour and named, the others faint, so a tower with many braces still gives
// a readable legend.
func bowSeries(members []measure.Member, first string, ct []float64, head func([]float64) []float64) []plots.Series {
	type cand struct {
		s   plots.Series
		max float64
	}
	var cs []cand
	for _, m := range members {
		if m.Kind != marks.KindBrace && m.ID != first {
			continue
		}
		bf := head(m.BowFrac)
		y := make([]float64, len(bf))
		peak := 0.0
		for i, v := range bf {
			y[i] = 100 * v
			if !math.IsNaN(v) && math.Abs(v) > peak {
				peak = math.Abs(v)
			}
		}
		if m.ID == first {
			peak = math.Inf(1)
		}
		cs = append(cs, cand{plots.Series{Name: m.ID, X: ct[:len(y)], Y: y}, peak})
	}
	order := make([]int, len(cs))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return cs[order[a]].max > cs[order[b]].max })
	coloured := make(map[int]bool)
	limit := bowColoured
	if first != "" {
		limit++
	}
	for _, i := range order[:min(limit, len(order))] {
		coloured[i] = true
	}
	// Faint lines first, so the coloured ones are drawn over them.
	var out []plots.Series
	for i, c := range cs {
		if !coloured[i] {
			c.s.Name, c.s.Faint = "", true
			out = append(out, c.s)
		}
	}
	for _, i := range order {
		if coloured[i] {
			out = append(out, cs[i].s)
		}
	}
	return out
}

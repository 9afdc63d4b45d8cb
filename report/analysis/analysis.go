// Package analysis is the pipeline behind `failframe analyze`: it reads the
// clip once (tracking the marked points and measuring motion energy from the
// same decoded frames), measures twist, sway, bow and strain, finds the
// failure's events, lines the load log up with video time, and writes the
// report folder.
//
// The report folder is built beside the destination and swapped in at the
// end, so an existing report is never half-overwritten.
package analysis

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"time"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/report/align"
	"github.com/failframe/failframe/report/evidence"
	"github.com/failframe/failframe/report/loadlog"
	"github.com/failframe/failframe/tracking"
	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/measure"
	"github.com/failframe/failframe/tracking/motion"
	"github.com/failframe/failframe/tracking/tracks"
)

// Config is one analysis.
type Config struct {
	// Clip is the clip file or image folder.
	Clip string
	// Marks is the marks file.
	Marks string
	// Load is the load log; "" = none.
	Load string
	// LoadOptions override what the load-log reader detects.
	LoadOptions loadlog.Options
	// LoadOffsetS, when set, is the offset given by the user (video = log + offset).
	LoadOffsetS *float64
	// Sync, when set, is a frame the user matched to a logger time.
	Sync *SyncMark
	// MassG is the structure's mass in grams; 0 = not given.
	MassG float64
	// CaptureFPS is the true capture rate from the command line; 0 = from the marks or container.
	CaptureFPS float64
	// ImageFPS is the rate stated for a folder of stills; 0 = unknown.
	ImageFPS float64
	// From and To bound the analysed range ("" = whole clip): a frame number or seconds like "1.25s".
	From, To string
	// Out is the report folder.
	Out string
	// Force replaces an existing report folder.
	Force bool
	// Tool names the program and its version for report.json.
	Tool string
	// Now returns the time stamped in the report; default time.Now.
	Now func() time.Time
}

// SyncMark is a frame matched by the user to a logger time.
type SyncMark struct {
	// Frame is the frame number.
	Frame int
	// LogTimeS is the logger time of that frame, seconds.
	LogTimeS float64
}

// Progress receives what the pipeline is doing; any field may be nil.
type Progress struct {
	// Stage is called when a stage starts.
	Stage func(name string)
	// Frames is called as frames are tracked (total 0 when unknown).
	Frames func(done, total int)
	// Warn is called with each warning as it is found.
	Warn func(msg string)
	// Note is called with facts worth printing as they are found, such as
	// the columns and units detected in the load log.
	Note func(msg string)
}

// InputError is an input that cannot be used: the clip, the marks, the load
// log, a range or the report folder.
type InputError struct{ Err error }

// Error returns the underlying problem's message.
func (e *InputError) Error() string { return e.Err.Error() }

// Unwrap returns the underlying problem.
func (e *InputError) Unwrap() error { return e.Err }

// maxLogWarnings is how many of the load log's problems are listed one by one.
const maxLogWarnings = 10

// ErrOutExists means the report folder exists and Force was not given.
var ErrOutExists = errors.New("report folder exists (use --force to replace it)")

func (p Progress) stage(s string) {
	if p.Stage != nil {
		p.Stage(s)
	}
}

// Run analyses the clip and writes the report folder cfg.Out. It returns the
// summary written as report.json.
func Run(cfg Config, prog Progress) (*report.Result, error) {
	if cfg.Out == "" {
		return nil, &InputError{errors.New("no report folder given")}
	}
	if cfg.MassG < 0 || math.IsNaN(cfg.MassG) || math.IsInf(cfg.MassG, 0) {
		return nil, &InputError{fmt.Errorf("structure mass %g g is not usable", cfg.MassG)}
	}
	if err := checkOut(cfg.Out, cfg.Force); err != nil {
		return nil, err
	}
	var warnings []string
	warn := func(format string, a ...any) {
		msg := fmt.Sprintf(format, a...)
		warnings = append(warnings, msg)
		if prog.Warn != nil {
			prog.Warn(msg)
		}
	}

	prog.stage("reading marks")
	m, err := marks.Load(cfg.Marks)
	if err != nil {
		return nil, err
	}
	if err := m.Validate(); err != nil {
		return nil, err
	}
	// Marks the measurements cannot use (no scale, no tower block to take
	// one from) fail before minutes of tracking, naming the marks file.
	if err := measure.CheckMarks(m); err != nil {
		return nil, &marks.Error{Path: cfg.Marks, Err: err}
	}

	// The load log first: a bad log should fail before minutes of tracking.
	var log *loadlog.Log
	var logFacts *report.LoadLogFacts
	if cfg.Load != "" {
		prog.stage("reading load log")
		f, err := os.Open(cfg.Load)
		if err != nil {
			return nil, &InputError{fmt.Errorf("read load log: %w", err)}
		}
		opt := cfg.LoadOptions
		if opt.MassG == 0 {
			opt.MassG = cfg.MassG
		}
		l, warns, err := loadlog.Parse(cfg.Load, f, opt)
		f.Close()
		if err != nil {
			return nil, err
		}
		log = l
		if prog.Note != nil {
			prog.Note(fmt.Sprintf("load log %s: %s", cfg.Load, l.Detected))
		}
		logFacts = &report.LoadLogFacts{Path: cfg.Load, Detected: l.Detected, Samples: l.Len(), PeriodS: l.PeriodS, SkippedLines: []int{}}
		shown := 0
		for _, w := range warns {
			if w.Line > 0 {
				logFacts.SkippedLines = append(logFacts.SkippedLines, w.Line)
			}
			if shown < maxLogWarnings {
				warn("load log %s: %s", cfg.Load, w)
				shown++
			}
		}
		if len(warns) > shown {
			warn("load log %s: %d more problems not listed (see load_log.skipped_lines in %s)", cfg.Load, len(warns)-shown, report.ResultFile)
		}
	}

	prog.stage("opening clip")
	src, err := capture.Open(cfg.Clip, capture.Options{ImageFPS: cfg.ImageFPS})
	if err != nil {
		return nil, &InputError{err}
	}
	defer src.Close()
	info := src.Info()
	tb, rateWarn, err := capture.ChooseRate(cfg.CaptureFPS, m.CaptureFPS, info.ContainerFPS)
	if err != nil {
		return nil, &InputError{fmt.Errorf("clip %s: %w", cfg.Clip, err)}
	}
	if rateWarn != "" {
		warn("%s", rateWarn)
	}
	if err := m.CheckBounds(info.Width, info.Height); err != nil {
		return nil, err
	}
	rng := tracking.Range{From: 0, To: -1}
	if cfg.From != "" {
		if rng.From, err = capture.ParsePosition(cfg.From, tb); err != nil {
			return nil, &InputError{fmt.Errorf("--from: %w", err)}
		}
	}
	if cfg.To != "" {
		if rng.To, err = capture.ParsePosition(cfg.To, tb); err != nil {
			return nil, &InputError{fmt.Errorf("--to: %w", err)}
		}
		if rng.To < rng.From {
			return nil, &InputError{fmt.Errorf("--to frame %d is before --from frame %d", rng.To, rng.From)}
		}
	}
	if cfg.Sync != nil && cfg.Sync.Frame < 0 {
		return nil, &InputError{fmt.Errorf("--sync frame %d is negative", cfg.Sync.Frame)}
	}

	// One pass over the frames: tracking, motion energy, the reference
	// frame, and the frames the evidence will be drawn from (kept shrunk:
	// sparse, and every frame around the first sign of the tower going, as
	// measure.CollapseWatch sees it).
	prog.stage("tracking")
	meter := motion.NewMeter()
	defer meter.Close()
	energyAt := map[int]float64{}
	refFrame := gocv.NewMat()
	defer refFrame.Close()
	kept := evidence.NewKeeper(evidence.DefaultKeep, info.Width, info.Height)
	defer kept.Close()
	expected := 0
	if info.FrameCount > 0 {
		expected = info.FrameCount - rng.From
		if rng.To >= 0 {
			expected = min(expected, rng.To-rng.From+1)
		}
	}
	watch := measure.NewCollapseWatch(expected)
	rows := 0 // frames tracked so far
	tr, err := tracking.Track(src, m, tracking.DefaultOptions(), rng, tracking.Hooks{
		OnFrame: func(frame int, img gocv.Mat, samples []tracks.Sample) error {
			// The motion energy is measured on the frame as kept (its
			// 160-pixel comparison width is far below the evidence size).
			small := kept.Add(frame, img)
			e := meter.Add(small)
			energyAt[frame] = e
			if frame == m.ReferenceFrame {
				img.CopyTo(&refFrame)
			}
			if r, found := watch.Add(e, samples); found {
				kept.Sign(frame - (rows - r))
			}
			rows++
			return nil
		},
		Progress: prog.Frames,
		Warn:     func(msg string) { warn("%s", msg) },
	})
	if err != nil {
		return nil, inputIfClip(err)
	}
	energy := make([]float64, tr.Len())
	for i, f := range tr.Frames {
		e, ok := energyAt[f]
		if !ok {
			e = math.NaN()
		}
		energy[i] = e
	}
	if err := kept.Err(); err != nil {
		warn("%v; those evidence frames are read from the clip again", err)
	}
	lost := lostSummary(tr)
	if lost != "" {
		warn("%s", lost)
	}

	prog.stage("measuring")
	in := measure.Input{Marks: m, Tracks: tr, CaptureFPS: tb.CaptureFPS, Energy: energy}
	meas, err := measure.Measure(in)
	if err != nil {
		return nil, err // already names the measure step
	}
	diag := measure.Diagnose(meas, in)
	for _, n := range meas.Notes {
		warn("%s", n)
	}

	res := &report.Result{
		Version:        report.ResultVersion,
		Tool:           cfg.Tool,
		Clip:           report.ClipFacts{Path: cfg.Clip, Width: info.Width, Height: info.Height, Codec: info.Codec, ContainerFPS: info.ContainerFPS, FrameCount: info.FrameCount, FirstFrame: tr.Frames[0], LastFrame: tr.Frames[tr.Len()-1]},
		CaptureFPS:     tb.CaptureFPS,
		CaptureFPSFrom: tb.From,
		MMPerPixel:     meas.MMPerPx,
		FirstMember:    diag.FirstMember,
		FailureMode:    diag.Mode,
		Account:        diag.Account,
		Advice:         append([]string{}, diag.Advice...),
		LoadLog:        logFacts,
		Events:         []report.Event{},
		Figures:        []report.Figure{},
	}
	now := time.Now
	if cfg.Now != nil {
		now = cfg.Now
	}
	res.CreatedAt = now().UTC().Format(time.RFC3339)
	if cfg.MassG > 0 {
		res.MassG = ptr(cfg.MassG)
	}
	for _, e := range diag.Events {
		res.Events = append(res.Events, report.Event{Kind: e.Kind, Member: e.Member, Frame: e.Frame, TimeS: tb.Time(e.Frame), Detail: e.Detail})
	}
	sort.SliceStable(res.Events, func(i, j int) bool { return res.Events[i].Frame < res.Events[j].Frame })
	res.Levels = levelSummaries(meas, diag)
	res.Members = memberSummaries(meas, diag)

	// Alignment and loads.
	var al *align.Result
	if log != nil {
		prog.stage("aligning load log")
		a, err := alignLog(cfg, log, tb, tr, energy, diag)
		if err != nil {
			warn("load log not lined up with the clip: %v; give --load-offset or --sync FRAME@LOGTIME", err)
		} else {
			al = &a
			res.Alignment = &report.Alignment{Method: a.Method, OffsetS: a.OffsetS, UncertaintyS: a.UncertaintyS, Detail: a.Detail}
			outside := 0
			for i := range res.Events {
				if g, ok := log.At(res.Events[i].TimeS - a.OffsetS); ok {
					res.Events[i].LoadG = ptr(g)
				} else {
					outside++
				}
			}
			if outside > 0 {
				warn("%d events fall outside the load log's time span; they have no load", outside)
			}
		}
		peak := math.Inf(-1)
		for _, g := range log.LoadG {
			peak = math.Max(peak, g)
		}
		res.PeakLoadG = ptr(peak)
		if cfg.MassG > 0 {
			if e, err := align.Efficiency(peak, cfg.MassG); err == nil {
				res.Efficiency = ptr(e)
			}
		}
	}
	res.Warnings = append([]string{}, warnings...)

	// Write the folder aside, then swap it in.
	prog.stage("writing report")
	tmp, err := os.MkdirTemp(filepath.Dir(filepath.Clean(cfg.Out)), "."+filepath.Base(filepath.Clean(cfg.Out))+".tmp-")
	if err != nil {
		return nil, fmt.Errorf("write report %s: %w", cfg.Out, err)
	}
	ok := false
	defer func() {
		if !ok {
			os.RemoveAll(tmp)
		}
	}()
	w := &writer{dir: tmp, res: res, m: m, tr: tr, meas: meas, diag: diag, tb: tb, log: log, al: al, energy: energy}
	// The evidence frames are read from the clip again while the CSV files
	// and plots are written: the two share nothing but read-only results.
	prog.stage("drawing evidence frames and plots")
	have := map[int]gocv.Mat{}
	if !refFrame.Empty() {
		have[m.ReferenceFrame] = refFrame
	}
	type evResult struct {
		out []evidence.Written
		err error
	}
	evDone := make(chan evResult, 1)
	go func() {
		out, err := w.evidence(src, have, kept)
		evDone <- evResult{out, err}
	}()
	// The charts are listed (in page order), then drawn on two goroutines
	// while a third writes the CSV files.
	err = w.plots()
	if err == nil {
		csvDone := make(chan error, 1)
		go func() { csvDone <- w.csvs() }()
		err = w.drawPlots(2)
		if cerr := <-csvDone; err == nil {
			err = cerr
		}
	}
	ev := <-evDone
	if err != nil {
		return nil, err
	}
	for _, o := range ev.out {
		w.files = append(w.files, o.File)
		if o.Caption != "" {
			res.Figures = append(res.Figures, report.Figure{File: o.File, Kind: "evidence", Caption: o.Caption})
		}
	}
	if ev.err != nil {
		if !errors.As(ev.err, new(*capture.FrameError)) {
			return nil, ev.err
		}
		warn("evidence frames incomplete: %v", ev.err)
		res.Warnings = append(res.Warnings[:0:0], warnings...)
	}
	res.Files = append(w.files, report.ResultFile, report.HTMLFile)
	sort.Strings(res.Files)
	if err := report.WriteResult(tmp, res); err != nil {
		return nil, err
	}
	if err := report.WriteHTML(tmp, res); err != nil {
		return nil, err
	}
	if err := swapIn(tmp, cfg.Out, cfg.Force); err != nil {
		return nil, err
	}
	ok = true
	return res, nil
}

func ptr(v float64) *float64 { return &v }

// checkOut fails when the report folder exists and may not be replaced.
func checkOut(out string, force bool) error {
	st, err := os.Stat(out)
	switch {
	case err == nil && !force:
		return &InputError{fmt.Errorf("%s: %w", out, ErrOutExists)}
	case err == nil && !st.IsDir():
		return &InputError{fmt.Errorf("%s exists and is not a folder", out)}
	case err != nil && !errors.Is(err, os.ErrNotExist):
		return &InputError{fmt.Errorf("report folder %s: %w", out, err)}
	}
	parent := filepath.Dir(filepath.Clean(out))
	if st, err := os.Stat(parent); err != nil || !st.IsDir() {
		if err := os.MkdirAll(parent, 0o755); err != nil {
			return &InputError{fmt.Errorf("report folder %s: %w", out, err)}
		}
	}
	return nil
}

// swapIn renames the finished folder tmp to out; with force an existing out
// is renamed aside first and removed only after the new one is in place.
func swapIn(tmp, out string, force bool) error {
	old := ""
	if _, err := os.Stat(out); err == nil {
		if !force {
			return &InputError{fmt.Errorf("%s: %w", out, ErrOutExists)}
		}
		old = tmp + ".old"
		if err := os.Rename(out, old); err != nil {
			return fmt.Errorf("replace report %s: %w", out, err)
		}
	}
	if err := os.Rename(tmp, out); err != nil {
		if old != "" {
			os.Rename(old, out)
		}
		return fmt.Errorf("write report %s: %w", out, err)
	}
	if old != "" {
		os.RemoveAll(old)
	}
	return nil
}

// inputIfClip marks decoding problems of the clip as bad input.
func inputIfClip(err error) error {
	var fe *capture.FrameError
	var me *marks.Error
	if errors.As(err, &fe) || errors.As(err, &me) {
		return err
	}
	return &InputError{err}
}

// lostSummary says which points were lost before the end, "" when none.
func lostSummary(tr *tracks.Tracks) string {
	var ids []string
	for j, id := range tr.IDs {
		for i := range tr.Samples {
			if tr.Samples[i][j].Lost {
				ids = append(ids, fmt.Sprintf("%s (from frame %d)", id, tr.Frames[i]))
				break
			}
		}
	}
	if len(ids) == 0 {
		return ""
	}
	if len(ids) > 8 {
		return fmt.Sprintf("%d of %d points were lost during the clip (e.g. %s)", len(ids), len(tr.IDs), ids[0])
	}
	return fmt.Sprintf("points lost during the clip: %v", ids)
}

// alignLog lines the log up with video time by the method the config asks for.
func alignLog(cfg Config, log *loadlog.Log, tb capture.Timebase, tr *tracks.Tracks, energy []float64, diag *measure.Diagnosis) (align.Result, error) {
	fp := 1 / tb.CaptureFPS
	switch {
	case cfg.Sync != nil:
		return align.Sync(cfg.Sync.Frame, tb.Time(cfg.Sync.Frame), cfg.Sync.LogTimeS, log.PeriodS, fp), nil
	case cfg.LoadOffsetS != nil:
		return align.Manual(*cfg.LoadOffsetS, log.PeriodS), nil
	}
	v := align.Video{TimesS: make([]float64, tr.Len()), Energy: energy, CollapseS: math.NaN(), FramePeriodS: fp}
	for i, f := range tr.Frames {
		v.TimesS[i] = tb.Time(f)
	}
	for _, e := range diag.Events {
		if e.Kind == "collapse" {
			v.CollapseS = tb.Time(e.Frame)
			break
		}
	}
	return align.Auto(log.TimesS, log.LoadG, log.PeriodS, v)
}

// collapseRow returns the row the maxima stop at: the collapse, or the end.
func collapseRow(meas *measure.Result, diag *measure.Diagnosis) int {
	if diag.CollapseRow >= 0 {
		return diag.CollapseRow
	}
	return len(meas.Frames)
}

func maxAbs(x []float64, end int) (float64, bool) {
	m, ok := 0.0, false
	for i := 0; i < end && i < len(x); i++ {
		if !math.IsNaN(x[i]) {
			m, ok = math.Max(m, math.Abs(x[i])), true
		}
	}
	return m, ok
}

func levelSummaries(meas *measure.Result, diag *measure.Diagnosis) []report.LevelSummary {
	end := collapseRow(meas, diag)
	out := []report.LevelSummary{}
	for _, l := range meas.Levels {
		s := report.LevelSummary{Level: l.Level, TwistObservable: l.Observable, Note: l.Note}
		if v, ok := maxAbs(l.TwistDeg, end); ok && l.Observable {
			s.MaxTwistDeg = round(v, 4)
		}
		if v, ok := maxAbs(l.SwayMM, end); ok {
			s.MaxSwayMM = round(v, 4)
		}
		out = append(out, s)
	}
	return out
}

func memberSummaries(meas *measure.Result, diag *measure.Diagnosis) []report.MemberSummary {
	end := collapseRow(meas, diag)
	out := []report.MemberSummary{}
	for _, m := range meas.Members {
		s := report.MemberSummary{ID: m.ID, Kind: m.Kind, LengthMM: round(m.LengthMM, 3), OnsetFrame: -1, BreakFrame: -1}
		if v, ok := maxAbs(m.BowMM, end); ok {
			s.MaxBowMM = round(v, 4)
		}
		if v, ok := maxAbs(m.BowFrac, end); ok {
			s.MaxBowPct = round(100*v, 4)
		}
		if v, ok := maxAbs(m.StrainPct, end); ok {
			s.MaxStrainPct = round(v, 4)
		}
		for _, e := range diag.Events {
			if e.Member != m.ID {
				continue
			}
			switch {
			case e.Kind == "onset" && s.OnsetFrame < 0:
				s.OnsetFrame = e.Frame
			case e.Kind == "break" && s.BreakFrame < 0:
				s.BreakFrame = e.Frame
			}
		}
		out = append(out, s)
	}
	return out
}

func round(v float64, digits int) float64 {
	p := math.Pow(10, float64(digits))
	return math.Round(v*p) / p
}

// Package loadlog reads load-cell logs as loggers and test stands write them:
// comma-, semicolon-, tab- or space-separated columns, a header line or none,
// comment lines starting with #, // or ;, a time column in seconds or
// milliseconds (or a sample index with a stated rate) and a load column in
// grams, kilograms, newtons or pounds-force.
//
// Loads are converted to grams (the mass a load equals under standard
// gravity). Columns and units are detected from the header and the values;
// Options override what was detected, and Log.Detected says what was used.
// A few isolated bad lines are skipped with a Warning; a file that cannot be
// trusted (many bad lines, time running backwards repeatedly, a unit that
// contradicts the values) is rejected with a *ParseError naming the line.
package loadlog

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"
)

// MaxPlausibleG is the largest load, in grams, accepted from a log of a model
// structure test (500 kg); a larger value means the unit is wrong.
const MaxPlausibleG = 500e3

// MaxPlausibleEfficiency is the largest load-to-mass ratio accepted when the
// structure's mass is known; model towers score in the hundreds to a few
// thousand (common practice), so a larger ratio means the unit is wrong.
const MaxPlausibleEfficiency = 20000

// maxLineBytes bounds one line of a log.
const maxLineBytes = 64 << 10

// maxBackwards is how many times time may run backwards before the file is
// rejected.
const maxBackwards = 3

// Options override what Parse detects. The zero value detects everything.
type Options struct {
	// Unit is the load unit: g, kg, N or lbf. Default "": from the header, else grams.
	Unit string
	// TimeUnit is the time column's unit: s, ms, us or index. Default "": from the
	// header, else guessed from the values.
	TimeUnit string
	// RateHz is the sampling rate for a sample-index time column or a log with
	// only a load column. Default 0: not given.
	RateHz float64
	// TimeColumn and LoadColumn are 1-based column numbers. Default 0: detect.
	TimeColumn, LoadColumn int
	// MassG is the structure's mass in grams; when set, a load implausibly
	// large for it is reported as a unit error. Default 0: unknown.
	MassG float64
}

// Log is a parsed load log.
type Log struct {
	// Path is the file the log came from.
	Path string
	// TimesS are the sample times on the logger's clock, seconds, strictly increasing.
	TimesS []float64
	// LoadG are the loads in grams, one per time.
	LoadG []float64
	// Lines are the source line numbers of the samples (1-based).
	Lines []int
	// PeriodS is the median sampling period, seconds.
	PeriodS float64
	// TimeUnit is the time unit used: s, ms, us or index.
	TimeUnit string
	// LoadUnit is the load unit used: g, kg, N or lbf.
	LoadUnit string
	// Detected says in one line which columns and units were used and why.
	Detected string
}

// Len returns the number of samples.
func (l *Log) Len() int { return len(l.TimesS) }

// XY returns sample i as (time s, load g).
func (l *Log) XY(i int) (float64, float64) { return l.TimesS[i], l.LoadG[i] }

// Warning is a problem Parse skipped over.
type Warning struct {
	// Line is the 1-based line number (0 for the whole file).
	Line int
	// Msg says what was wrong.
	Msg string
}

// String formats the warning with its line number.
func (w Warning) String() string {
	if w.Line > 0 {
		return fmt.Sprintf("line %d: %s", w.Line, w.Msg)
	}
	return w.Msg
}

// ParseError is a load log that cannot be used.
type ParseError struct {
	// Path is the file.
	Path string
	// Line is the 1-based line number, 0 when the problem is the whole file.
	Line int
	// Err is the problem.
	Err error
}

// Error names the file and the line.
func (e *ParseError) Error() string {
	if e.Line > 0 {
		return fmt.Sprintf("load log %s line %d: %v", e.Path, e.Line, e.Err)
	}
	return fmt.Sprintf("load log %s: %v", e.Path, e.Err)
}

// Unwrap returns the underlying problem.
func (e *ParseError) Unwrap() error { return e.Err }

type srcLine struct {
	n    int
	text string
}

// Parse reads a load log from r; path names it in errors.
func Parse(path string, r io.Reader, opt Options) (*Log, []Warning, error) {
	fail := func(line int, format string, a ...any) (*Log, []Warning, error) {
		return nil, nil, &ParseError{Path: path, Line: line, Err: fmt.Errorf(format, a...)}
	}
	if opt.Unit != "" {
		u, ok := NormalizeUnit(opt.Unit)
		if !ok {
			return fail(0, "unknown load unit %q (want g, kg, N or lbf)", opt.Unit)
		}
		opt.Unit = u
	}
	if opt.TimeUnit != "" {
		u, ok := NormalizeTimeUnit(opt.TimeUnit)
		if !ok {
			return fail(0, "unknown time unit %q (want s, ms, us or index)", opt.TimeUnit)
		}
		opt.TimeUnit = u
	}
	if math.IsNaN(opt.RateHz) || math.IsInf(opt.RateHz, 0) || opt.RateHz < 0 {
		return fail(0, "sampling rate %g Hz is not usable", opt.RateHz)
	}
	if opt.TimeColumn < 0 || opt.LoadColumn < 0 || (opt.TimeColumn > 0 && opt.TimeColumn == opt.LoadColumn) {
		return fail(0, "time column %d and load column %d are not usable", opt.TimeColumn, opt.LoadColumn)
	}

	lines, err := readLines(r)
	if err != nil {
		var pe *ParseError
		if errors.As(err, &pe) {
			pe.Path = path
			return nil, nil, pe
		}
		return nil, nil, &ParseError{Path: path, Err: err}
	}
	if len(lines) == 0 {
		return fail(0, "no data lines")
	}
	delim := detectDelim(lines)
	decimalComma := delim == ';'

	// The header is the last non-numeric line before the first numeric one.
	first := -1
	for i, l := range lines {
		if allNumeric(splitFields(l.text, delim), decimalComma) {
			first = i
			break
		}
	}
	if first < 0 {
		return fail(lines[0].n, "no line of numbers found")
	}
	// Lines before it that hold a number are bad data lines, not a header.
	var header []string
	headerLine := 0
	var notes []string
	start := first
	for i := first - 1; i >= 0; i-- {
		if noneNumeric(splitFields(lines[i].text, delim), decimalComma) {
			header = splitFields(lines[i].text, delim)
			headerLine = lines[i].n
			start = i + 1
			if i > 0 {
				notes = append(notes, fmt.Sprintf("skipped %d preamble lines", i))
			}
			break
		}
	}
	if header == nil {
		start = 0
	}
	data := lines[start:]
	ncols := len(splitFields(lines[first].text, delim))
	if delim == ' ' && len(header) > ncols {
		header = mergeUnitFields(header)
	}

	// Columns.
	timeCol, loadCol := -1, -1
	var hdrTimeUnit, hdrLoadUnit string
	if header != nil {
		timeCol, loadCol, hdrTimeUnit, hdrLoadUnit = detectColumns(header)
	}
	how := "header"
	if header == nil || loadCol < 0 {
		how = "position"
		switch {
		case ncols >= 2:
			if timeCol < 0 {
				timeCol = 0
			}
			loadCol = 1
			if timeCol == 1 {
				loadCol = 0
			}
		case ncols == 1:
			timeCol, loadCol = -1, 0
		}
	}
	if opt.TimeColumn > 0 {
		timeCol = opt.TimeColumn - 1
		hdrTimeUnit = ""
		how = "options"
	}
	if opt.LoadColumn > 0 {
		loadCol = opt.LoadColumn - 1
		how = "options"
	}
	if header != nil {
		if opt.TimeColumn > 0 && timeCol < len(header) {
			_, hdrTimeUnit = timeUnitOf(header[timeCol])
		}
		if opt.LoadColumn > 0 && loadCol < len(header) {
			hdrLoadUnit = loadUnitOf(header[loadCol])
		}
	}
	if loadCol < 0 || loadCol == timeCol {
		return fail(headerLine, "cannot tell which column holds the load")
	}

	// Units.
	loadUnit := hdrLoadUnit
	loadUnitFrom := "header"
	var warns []Warning
	if opt.Unit != "" {
		if hdrLoadUnit != "" && hdrLoadUnit != opt.Unit {
			warns = append(warns, Warning{Line: headerLine, Msg: fmt.Sprintf("load unit %s from the options overrides the header's %s", opt.Unit, hdrLoadUnit)})
		}
		loadUnit, loadUnitFrom = opt.Unit, "options"
	}
	if loadUnit == "" {
		loadUnit, loadUnitFrom = UnitGram, "assumed"
	}
	gramsPer, _ := GramsPer(loadUnit)

	// Read the numbers.
	type raw struct {
		line int
		t, v float64
	}
	need := loadCol + 1
	if timeCol+1 > need {
		need = timeCol + 1
	}
	var rows []raw
	var bad []Warning
	for _, l := range data {
		f := splitFields(l.text, delim)
		if len(f) < need {
			bad = append(bad, Warning{Line: l.n, Msg: fmt.Sprintf("%d fields, want at least %d", len(f), need)})
			continue
		}
		var t float64
		if timeCol >= 0 {
			var msg string
			t, msg = parseTimeValue(f[timeCol], decimalComma)
			if msg != "" {
				bad = append(bad, Warning{Line: l.n, Msg: "time " + msg})
				continue
			}
		} else {
			t = float64(len(rows))
		}
		v, msg := parseNumber(f[loadCol], decimalComma)
		if msg != "" {
			bad = append(bad, Warning{Line: l.n, Msg: "load " + msg})
			continue
		}
		rows = append(rows, raw{l.n, t, v})
	}
	if len(rows) < 2 {
		if len(bad) > 0 {
			return fail(bad[0].Line, "fewer than 2 usable samples (%s)", bad[0].Msg)
		}
		return fail(data[0].n, "fewer than 2 usable samples")
	}

	// Time unit.
	timeUnit, timeUnitFrom := hdrTimeUnit, "header"
	if timeCol < 0 {
		timeUnit, timeUnitFrom = TimeIndex, "no time column"
	}
	if opt.TimeUnit != "" {
		timeUnit, timeUnitFrom = opt.TimeUnit, "options"
	}
	if timeUnit == "" {
		ts := make([]float64, len(rows))
		for i, r := range rows {
			ts[i] = r.t
		}
		var why string
		timeUnit, why = guessTimeUnit(ts, opt.RateHz)
		if timeUnit == "" {
			return fail(rows[0].line, "%s", why)
		}
		timeUnitFrom = why
	}
	var timeScale float64
	switch timeUnit {
	case TimeSeconds:
		timeScale = 1
	case TimeMilliseconds:
		timeScale = 1e-3
	case TimeMicroseconds:
		timeScale = 1e-6
	case TimeIndex:
		if opt.RateHz <= 0 {
			return fail(rows[0].line, "time is a sample index; give the sampling rate (--load-rate)")
		}
		timeScale = 1 / opt.RateHz
	}

	// Order in time.
	log := &Log{Path: path, TimeUnit: timeUnit, LoadUnit: loadUnit}
	backwards := 0
	firstBackwards := 0
	for _, r := range rows {
		t := r.t * timeScale
		if math.IsInf(t, 0) || math.IsNaN(t) {
			bad = append(bad, Warning{Line: r.line, Msg: "time out of range"})
			continue
		}
		if n := len(log.TimesS); n > 0 {
			prev := log.TimesS[n-1]
			switch {
			case t < prev:
				backwards++
				if firstBackwards == 0 {
					firstBackwards = r.line
				}
				bad = append(bad, Warning{Line: r.line, Msg: fmt.Sprintf("time %.6g s goes backwards (previous sample %.6g s on line %d)", t, prev, log.Lines[n-1])})
				continue
			case t == prev:
				bad = append(bad, Warning{Line: r.line, Msg: fmt.Sprintf("duplicate time %.6g s (also on line %d)", t, log.Lines[n-1])})
				continue
			}
		}
		log.TimesS = append(log.TimesS, t)
		log.LoadG = append(log.LoadG, r.v*gramsPer)
		log.Lines = append(log.Lines, r.line)
	}
	sort.SliceStable(bad, func(i, j int) bool { return bad[i].Line < bad[j].Line })
	if backwards >= maxBackwards {
		return fail(firstBackwards, "time goes backwards on %d lines (first here); the log cannot be trusted", backwards)
	}
	if len(bad) > 1 && len(bad)*20 > len(data) {
		return fail(bad[0].Line, "%d of %d data lines are bad (first: %s); the log cannot be trusted", len(bad), len(data), bad[0].Msg)
	}
	if len(log.TimesS) < 2 {
		return fail(data[0].n, "fewer than 2 usable samples")
	}

	// Sign: a log where compression reads negative.
	lo, hi := minMax(log.LoadG)
	if lo < 0 && -lo > 10*math.Max(hi, 0) {
		for i := range log.LoadG {
			log.LoadG[i] = -log.LoadG[i]
		}
		notes = append(notes, "loads are negative: sign flipped")
	}

	// Plausibility of the unit.
	peakI := 0
	for i, v := range log.LoadG {
		if v > log.LoadG[peakI] {
			peakI = i
		}
	}
	peak := log.LoadG[peakI]
	unitWhy := fmt.Sprintf("unit %s (%s)", loadUnit, loadUnitFrom)
	if peak > MaxPlausibleG {
		shown := fmt.Sprintf("%.6g %s", peak/gramsPer, loadUnit)
		if loadUnit != "kg" {
			shown += fmt.Sprintf(" = %.6g kg", peak/1000)
		}
		return fail(log.Lines[peakI], "load %s is implausible for a model structure; %s looks wrong", shown, unitWhy)
	}
	if opt.MassG > 0 && peak/opt.MassG > MaxPlausibleEfficiency {
		return fail(log.Lines[peakI], "load %.6g %s = %.6g g is %.0f times the structure's %.4g g; %s looks wrong", peak/gramsPer, loadUnit, peak, peak/opt.MassG, opt.MassG, unitWhy)
	}
	if opt.MassG > 0 && peak < opt.MassG {
		warns = append(warns, Warning{Msg: fmt.Sprintf("peak load %.4g g is less than the structure's mass %.4g g; check the load unit (%s)", peak, opt.MassG, unitWhy)})
	}

	log.PeriodS = typicalStep(log.TimesS)
	for i := 1; i < len(log.TimesS); i++ {
		if gap := log.TimesS[i] - log.TimesS[i-1]; gap > 10*log.PeriodS {
			warns = append(warns, Warning{Line: log.Lines[i], Msg: fmt.Sprintf("gap of %.4g s in the log (%.0f sample periods)", gap, gap/log.PeriodS)})
		}
	}
	warns = append(warns, bad...)

	delimName := map[rune]string{',': "comma", ';': "semicolon", '\t': "tab", ' ': "space"}[delim]
	timeDesc := "none"
	if timeCol >= 0 {
		timeDesc = fmt.Sprintf("column %d%s", timeCol+1, headerName(header, timeCol))
	}
	timeUnitDesc := timeUnit
	if timeUnit == TimeIndex {
		timeUnitDesc = fmt.Sprintf("sample index at %g Hz", opt.RateHz)
	}
	parts := []string{
		fmt.Sprintf("%s-separated", delimName),
		fmt.Sprintf("time %s in %s (%s)", timeDesc, timeUnitDesc, timeUnitFrom),
		fmt.Sprintf("load column %d%s in %s (%s)", loadCol+1, headerName(header, loadCol), loadUnit, loadUnitFrom),
		fmt.Sprintf("columns by %s", how),
		fmt.Sprintf("%d samples, period %.4g s", len(log.TimesS), log.PeriodS),
	}
	if headerLine > 0 {
		parts = append(parts, fmt.Sprintf("header on line %d", headerLine))
	} else {
		parts = append(parts, "no header")
	}
	if len(bad) > 0 {
		parts = append(parts, fmt.Sprintf("%d bad lines skipped", len(bad)))
	}
	parts = append(parts, notes...)
	log.Detected = strings.Join(parts, "; ")
	return log, warns, nil
}

func headerName(header []string, col int) string {
	if col >= 0 && col < len(header) {
		return fmt.Sprintf(" %q", header[col])
	}
	return ""
}

// readLines returns the non-blank, non-comment lines with their numbers.
func readLines(r io.Reader) ([]srcLine, error) {
	br := bufio.NewReader(r)
	var out []srcLine
	n := 0
	for {
		s, err := br.ReadString('\n')
		if len(s) > 0 {
			n++
			if len(s) > maxLineBytes {
				return nil, &ParseError{Line: n, Err: fmt.Errorf("line longer than %d bytes", maxLineBytes)}
			}
			if n == 1 {
				s = strings.TrimPrefix(s, "\ufeff")
			}
			t := strings.TrimSpace(s)
			if t != "" && !strings.HasPrefix(t, "#") && !strings.HasPrefix(t, "//") && !strings.HasPrefix(t, ";") {
				out = append(out, srcLine{n, t})
			}
		}
		if err == io.EOF {
			return out, nil
		}
		if err != nil {
			return nil, fmt.Errorf("read: %w", err)
		}
	}
}

// detectDelim picks the separator: one found in every one of the first
// lines (semicolon before comma, since a decimal comma goes with semicolons),
// else the one found in most of them, else white space.
func detectDelim(lines []srcLine) rune {
	k := len(lines)
	if k > 20 {
		k = 20
	}
	best, bestN := ' ', 0
	for _, d := range []rune{';', ',', '\t'} {
		n := 0
		for _, l := range lines[:k] {
			if strings.ContainsRune(l.text, d) {
				n++
			}
		}
		if n == k {
			return d
		}
		if n > bestN {
			best, bestN = d, n
		}
	}
	if bestN*2 > k {
		return best
	}
	return ' '
}

func splitFields(s string, delim rune) []string {
	var f []string
	if delim == ' ' {
		f = strings.Fields(s)
	} else {
		f = strings.Split(s, string(delim))
	}
	for i := range f {
		f[i] = strings.Trim(strings.TrimSpace(f[i]), `"'`)
	}
	// A trailing separator leaves an empty last field.
	for len(f) > 0 && f[len(f)-1] == "" {
		f = f[:len(f)-1]
	}
	return f
}

// mergeUnitFields joins a header's unit-only fields ("[kg]", "(N)", "ms") to
// the field before them, for space-separated headers like "t [s]  load [kg]".
func mergeUnitFields(h []string) []string {
	var out []string
	for _, f := range h {
		_, isLoad := NormalizeUnit(strings.Trim(f, "[]()"))
		tu, isTime := NormalizeTimeUnit(strings.Trim(f, "[]()"))
		unitOnly := isLoad || (isTime && tu != TimeIndex)
		if len(out) > 0 && (unitOnly || strings.HasPrefix(f, "[") || strings.HasPrefix(f, "(")) {
			out[len(out)-1] += " " + f
			continue
		}
		out = append(out, f)
	}
	return out
}

func noneNumeric(f []string, decimalComma bool) bool {
	for _, s := range f {
		if _, msg := parseTimeValue(s, decimalComma); msg == "" {
			return false
		}
	}
	return true
}

func allNumeric(f []string, decimalComma bool) bool {
	if len(f) == 0 {
		return false
	}
	for _, s := range f {
		if _, msg := parseTimeValue(s, decimalComma); msg != "" {
			return false
		}
	}
	return true
}

// parseNumber parses a finite number; msg says what is wrong otherwise.
func parseNumber(s string, decimalComma bool) (float64, string) {
	if decimalComma {
		s = strings.Replace(s, ",", ".", 1)
	}
	if s == "" {
		return 0, "is empty"
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && errors.Is(ne.Err, strconv.ErrRange) {
			return 0, fmt.Sprintf("%q is out of range", clip(s))
		}
		return 0, fmt.Sprintf("%q is not a number", clip(s))
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Sprintf("%q is not a finite number", clip(s))
	}
	return v, ""
}

// dateLayouts are the date-and-time stamps accepted in a time column.
var dateLayouts = []string{time.RFC3339Nano, "2006-01-02T15:04:05.999999999", "2006-01-02 15:04:05.999999999", "2006/01/02 15:04:05.999999999"}

// parseTimeValue parses a number, a clock time h:mm:ss.sss (as seconds) or a
// date and time such as 2026-03-14T10:00:00.125 (as Unix seconds).
func parseTimeValue(s string, decimalComma bool) (float64, string) {
	if !strings.Contains(s, ":") {
		return parseNumber(s, decimalComma)
	}
	if len(s) >= 19 && (s[4] == '-' || s[4] == '/') {
		for _, l := range dateLayouts {
			if t, err := time.Parse(l, s); err == nil {
				return float64(t.Unix()) + float64(t.Nanosecond())/1e9, ""
			}
		}
		return 0, fmt.Sprintf("%q is not a date and time", clip(s))
	}
	parts := strings.Split(s, ":")
	if len(parts) > 3 {
		return 0, fmt.Sprintf("%q is not a time", clip(s))
	}
	var t float64
	for i, p := range parts {
		v, msg := parseNumber(p, decimalComma)
		if msg != "" || v < 0 || (i < len(parts)-1 && v != math.Trunc(v)) {
			return 0, fmt.Sprintf("%q is not a time", clip(s))
		}
		t = t*60 + v
	}
	return t, ""
}

func clip(s string) string {
	if len(s) > 24 {
		return s[:24] + "..."
	}
	return s
}

// tokens splits a header field into lower-case words.
func tokens(s string) []string {
	return strings.FieldsFunc(strings.ToLower(s), func(r rune) bool {
		return !(r >= 'a' && r <= 'z' || r >= '0' && r <= '9')
	})
}

var (
	timeWords  = map[string]bool{"time": true, "t": true, "timestamp": true, "elapsed": true, "clock": true}
	indexWords = map[string]bool{"sample": true, "samples": true, "index": true, "idx": true, "n": true, "no": true, "count": true}
	loadWords  = map[string]bool{"load": true, "force": true, "mass": true, "weight": true, "reading": true, "cell": true}
)

// timeUnitOf returns whether a header field names a time column and its unit.
func timeUnitOf(field string) (isTime bool, unit string) {
	for _, tok := range tokens(field) {
		if timeWords[tok] {
			isTime = true
		}
		if u, ok := NormalizeTimeUnit(tok); ok && u != TimeIndex {
			isTime, unit = true, u
		}
	}
	return isTime, unit
}

// loadUnitOf returns the load unit a header field names, or "".
func loadUnitOf(field string) string {
	unit := ""
	for _, tok := range tokens(field) {
		if u, ok := NormalizeUnit(tok); ok {
			unit = u
		}
	}
	return unit
}

// detectColumns finds the time and load columns from a header.
func detectColumns(header []string) (timeCol, loadCol int, timeUnit, loadUnit string) {
	timeCol, loadCol = -1, -1
	indexCol := -1
	unitCol := -1
	for i, h := range header {
		toks := tokens(h)
		isLoad := false
		for _, tok := range toks {
			if loadWords[tok] {
				isLoad = true
			}
		}
		if isLoad && loadCol < 0 {
			loadCol = i
			continue
		}
		if isTime, _ := timeUnitOf(h); isTime && timeCol < 0 {
			timeCol = i
			continue
		}
		if len(toks) == 1 && indexWords[toks[0]] && indexCol < 0 {
			indexCol = i
			continue
		}
		if loadUnitOf(h) != "" && unitCol < 0 {
			unitCol = i
		}
	}
	if loadCol < 0 {
		loadCol = unitCol
	}
	if timeCol < 0 && indexCol >= 0 {
		timeCol = indexCol
		timeUnit = TimeIndex
	} else if timeCol >= 0 {
		_, timeUnit = timeUnitOf(header[timeCol])
	}
	if loadCol >= 0 {
		loadUnit = loadUnitOf(header[loadCol])
	}
	return timeCol, loadCol, timeUnit, loadUnit
}

// guessTimeUnit guesses the unit of a time column from its values; unit is ""
// (and why the reason) when it cannot be told.
func guessTimeUnit(ts []float64, rateHz float64) (unit, why string) {
	step := medianStep(ts)
	integers := true
	for _, t := range ts {
		if t != math.Trunc(t) {
			integers = false
			break
		}
	}
	switch {
	case integers && step == 1:
		if rateHz > 0 {
			return TimeIndex, "guessed: whole numbers in steps of 1 read as a sample index"
		}
		return "", "time column counts 0, 1, 2, ... like a sample index; give the sampling rate (--load-rate) or the time unit (--load-time-unit)"
	case step > 1:
		return TimeMilliseconds, fmt.Sprintf("guessed: steps of %.4g read as ms", step)
	case step > 0:
		return TimeSeconds, fmt.Sprintf("guessed: steps of %.4g read as s", step)
	}
	return "", "time column does not increase"
}

// medianStep is the median of the positive differences, 0 when there are none.
func medianStep(ts []float64) float64 {
	var d []float64
	for i := 1; i < len(ts); i++ {
		if s := ts[i] - ts[i-1]; s > 0 {
			d = append(d, s)
		}
	}
	if len(d) == 0 {
		return 0
	}
	sort.Float64s(d)
	return d[len(d)/2]
}

// typicalStep is the mean of the steps within half a median step of the
// median: loggers that stamp whole milliseconds alternate 12 and 13 ms at
// 80 Hz, and the mean of those is the true 12.5 ms; gaps are left out.
func typicalStep(ts []float64) float64 {
	med := medianStep(ts)
	sum, n := 0.0, 0
	for i := 1; i < len(ts); i++ {
		if d := ts[i] - ts[i-1]; d >= 0.5*med && d <= 1.5*med {
			sum += d
			n++
		}
	}
	if n == 0 {
		return med
	}
	return sum / float64(n)
}

func minMax(v []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, x := range v {
		lo = math.Min(lo, x)
		hi = math.Max(hi, x)
	}
	return lo, hi
}

// At returns the load in grams at logger time t by linear interpolation; ok
// is false outside the log.
func (l *Log) At(t float64) (g float64, ok bool) {
	n := len(l.TimesS)
	if n == 0 || math.IsNaN(t) || t < l.TimesS[0] || t > l.TimesS[n-1] {
		return math.NaN(), false
	}
	i := sort.SearchFloat64s(l.TimesS, t)
	if i < n && l.TimesS[i] == t {
		return l.LoadG[i], true
	}
	t0, t1 := l.TimesS[i-1], l.TimesS[i]
	f := (t - t0) / (t1 - t0)
	return l.LoadG[i-1] + f*(l.LoadG[i]-l.LoadG[i-1]), true
}

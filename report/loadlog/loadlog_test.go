package loadlog

import (
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
)

// Standard gravity g_n = 9.80665 m/s^2 (3rd CGPM 1901; ISO 80000-3), so
// 1 N = 1000/9.80665 g = 101.9716213 g. 1 lbf = 4.4482216152605 N exactly
// (international pound, 1959: 0.45359237 kg x g_n), so 1 lbf = 453.59237 g.
func TestGramsPer(t *testing.T) {
	tests := []struct {
		unit string
		want float64
	}{
		{"g", 1},
		{"kg", 1000},
		{"N", 101.97162129779283}, // 1000 / 9.80665 (CGPM 1901 g_n)
		{"lbf", 453.59237},        // 0.45359237 kg, definition of the pound (1959)
	}
	for _, tt := range tests {
		got, err := GramsPer(tt.unit)
		if err != nil {
			t.Fatalf("GramsPer(%s): %v", tt.unit, err)
		}
		if math.Abs(got-tt.want) > 1e-9*tt.want {
			t.Errorf("GramsPer(%s) = %.12g, want %.12g", tt.unit, got, tt.want)
		}
	}
	if _, err := GramsPer("stone"); err == nil {
		t.Error("GramsPer(stone): no error")
	}
}

func TestParseLayouts(t *testing.T) {
	tests := []struct {
		name     string
		in       string
		opt      Options
		times    []float64
		loads    []float64 // grams
		unit     string
		timeUnit string
		detected []string // substrings of Detected
	}{
		{
			name:  "csv header ms grams",
			in:    "time_ms,load_g\n0,0\n10,100\n20,250\n",
			times: []float64{0, 0.01, 0.02}, loads: []float64{0, 100, 250},
			unit: "g", timeUnit: "ms",
			detected: []string{"comma-separated", `"time_ms"`, `"load_g"`, "header on line 1"},
		},
		{
			name:  "csv header seconds newtons",
			in:    "Time (s),Force (N)\n0.00,0\n0.01,9.80665\n0.02,19.6133\n",
			times: []float64{0, 0.01, 0.02}, loads: []float64{0, 1000, 2000}, // 9.80665 N = 1 kg under g_n
			unit: "N", timeUnit: "s",
		},
		{
			name:  "whitespace kg with comments",
			in:    "# logger 7\n// tare done\n; rate 100 Hz\nt[s]   mass [kg]\n0.0  0.5\n0.5  1.25\n1.0  2.0\n",
			times: []float64{0, 0.5, 1.0}, loads: []float64{500, 1250, 2000},
			unit: "kg", timeUnit: "s", detected: []string{"space-separated", "header on line 4"},
		},
		{
			name:  "tab separated lbf",
			in:    "elapsed_ms\tweight lbf\n0\t0\n100\t1\n200\t2\n",
			times: []float64{0, 0.1, 0.2}, loads: []float64{0, 453.59237, 907.18474}, // 1 lbf = 453.59237 g (1959)
			unit: "lbf", timeUnit: "ms",
		},
		{
			name:  "no header ms guessed",
			in:    "0,12\n20,15\n40,30\n60,31\n",
			times: []float64{0, 0.02, 0.04, 0.06}, loads: []float64{12, 15, 30, 31},
			unit: "g", timeUnit: "ms", detected: []string{"no header", "guessed", "assumed"},
		},
		{
			name:  "no header seconds guessed with unit option",
			in:    "0.00 0.1\n0.05 0.2\n0.10 0.3\n",
			opt:   Options{Unit: "kg"},
			times: []float64{0, 0.05, 0.1}, loads: []float64{100, 200, 300},
			unit: "kg", timeUnit: "s",
		},
		{
			name:  "sample index with rate",
			in:    "sample,load_g\n0,1\n1,2\n2,3\n",
			opt:   Options{RateHz: 50},
			times: []float64{0, 0.02, 0.04}, loads: []float64{1, 2, 3},
			unit: "g", timeUnit: "index", detected: []string{"sample index at 50 Hz"},
		},
		{
			name:  "load only with rate",
			in:    "load_kg\n0.1\n0.2\n0.4\n",
			opt:   Options{RateHz: 10},
			times: []float64{0, 0.1, 0.2}, loads: []float64{100, 200, 400},
			unit: "kg", timeUnit: "index",
		},
		{
			name:  "semicolon decimal comma",
			in:    "Zeit [s];Load [N]\n0,00;0,0\n0,01;9,80665\n",
			times: []float64{0, 0.01}, loads: []float64{0, 1000},
			unit: "N", timeUnit: "s", detected: []string{"semicolon-separated"},
		},
		{
			name:  "load first, time second",
			in:    "load_g,time_s\n5,0.0\n6,0.1\n7,0.2\n",
			times: []float64{0, 0.1, 0.2}, loads: []float64{5, 6, 7},
			unit: "g", timeUnit: "s",
		},
		{
			name:  "extra columns and preamble",
			in:    "Logger HX711 v2\nchannel A\nindex,time_ms,raw,load_g\n0,0,8388,0\n1,12.5,8390,3\n2,25,8400,9\n",
			times: []float64{0, 0.0125, 0.025}, loads: []float64{0, 3, 9},
			unit: "g", timeUnit: "ms", detected: []string{"skipped 2 preamble lines", "load column 4"},
		},
		{
			name:  "unit option overrides header",
			in:    "time_s,load_kg\n0,1\n1,2\n",
			opt:   Options{Unit: "g"},
			times: []float64{0, 1}, loads: []float64{1, 2},
			unit: "g", timeUnit: "s", detected: []string{"(options)"},
		},
		{
			name:  "columns by option",
			in:    "a,b,c\n0,9,0.1\n1,9,0.2\n2,9,0.3\n",
			opt:   Options{TimeColumn: 3, LoadColumn: 1, TimeUnit: "s"},
			times: []float64{0.1, 0.2, 0.3}, loads: []float64{0, 1, 2},
			unit: "g", timeUnit: "s",
		},
		{
			name:  "negative compression flipped",
			in:    "time_ms,force_N\n0,-0.0\n10,-1\n20,-2\n",
			times: []float64{0, 0.01, 0.02}, loads: []float64{0, 101.97162129779283, 203.94324259558566},
			unit: "N", timeUnit: "ms", detected: []string{"sign flipped"},
		},
		{
			name:  "clock times",
			in:    "timestamp,load_g\n12:00:00.00,1\n12:00:00.25,2\n12:00:00.50,3\n",
			times: []float64{43200, 43200.25, 43200.5}, loads: []float64{1, 2, 3},
			unit: "g", timeUnit: "s",
		},
		{
			// Unix time of 2026-03-14T10:00:00Z is 1773482400 s (checked with Python's datetime).
			name:  "date and time stamps",
			in:    "Timestamp,Weight (kg)\n2026-03-14T10:00:00.000Z,1.5\n2026-03-14T10:00:00.100Z,1.6\n2026-03-14T10:00:00.200Z,1.7\n",
			times: []float64{1773482400, 1773482400.1, 1773482400.2}, loads: []float64{1500, 1600, 1700},
			unit: "kg", timeUnit: "s",
		},
		{
			name:  "microseconds",
			in:    "time_us load_g\n0 1\n12500 2\n25000 3\n",
			times: []float64{0, 0.0125, 0.025}, loads: []float64{1, 2, 3},
			unit: "g", timeUnit: "us",
		},
		{
			name:  "crlf and quotes",
			in:    "\"time_ms\",\"load_g\"\r\n\"0\",\"1\"\r\n\"5\",\"2\"\r\n",
			times: []float64{0, 0.005}, loads: []float64{1, 2},
			unit: "g", timeUnit: "ms",
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			log, warns, err := Parse("log.csv", strings.NewReader(tt.in), tt.opt)
			if err != nil {
				t.Fatalf("Parse: %v", err)
			}
			if len(log.TimesS) != len(tt.times) {
				t.Fatalf("times = %v, want %v (warnings %v)", log.TimesS, tt.times, warns)
			}
			for i := range tt.times {
				if math.Abs(log.TimesS[i]-tt.times[i]) > 1e-9 {
					t.Errorf("time[%d] = %.9g, want %.9g", i, log.TimesS[i], tt.times[i])
				}
				if math.Abs(log.LoadG[i]-tt.loads[i]) > 1e-9*math.Max(1, tt.loads[i]) {
					t.Errorf("load[%d] = %.12g, want %.12g", i, log.LoadG[i], tt.loads[i])
				}
			}
			if log.LoadUnit != tt.unit || log.TimeUnit != tt.timeUnit {
				t.Errorf("units = %s, %s; want %s, %s", log.LoadUnit, log.TimeUnit, tt.unit, tt.timeUnit)
			}
			for _, d := range tt.detected {
				if !strings.Contains(log.Detected, d) {
					t.Errorf("Detected %q lacks %q", log.Detected, d)
				}
			}
			if log.PeriodS <= 0 {
				t.Errorf("PeriodS = %g", log.PeriodS)
			}
		})
	}
}

func TestParseSkipsIsolatedBadLines(t *testing.T) {
	var b strings.Builder
	b.WriteString("time_ms,load_g\n")
	for i := 0; i < 100; i++ {
		switch i {
		case 30:
			b.WriteString("300,oops\n") // line 32: text in the load column
		case 60:
			b.WriteString("600,NaN\n") // line 62
		default:
			b.WriteString(strings.Join([]string{itoa(i * 10), itoa(i)}, ",") + "\n")
		}
	}
	log, warns, err := Parse("a.csv", strings.NewReader(b.String()), Options{})
	if err != nil {
		t.Fatalf("Parse: %v", err)
	}
	if log.Len() != 98 {
		t.Errorf("samples = %d, want 98", log.Len())
	}
	lines := map[int]bool{}
	for _, w := range warns {
		lines[w.Line] = true
	}
	if !lines[32] || !lines[62] {
		t.Errorf("warnings %v lack lines 32 and 62", warns)
	}
}

func TestParseRejects(t *testing.T) {
	many := "time_ms,load_g\n"
	for i := 0; i < 20; i++ {
		if i%3 == 0 {
			many += "x,1\n"
		} else {
			many += itoa(i*10) + ",1\n"
		}
	}
	backwards := "time_s,load_g\n0,1\n1,1\n0.5,1\n2,1\n1.5,1\n3,1\n2.5,1\n4,1\n"
	tests := []struct {
		name string
		in   string
		opt  Options
		line int
		msg  string
	}{
		{"empty", "", Options{}, 0, "no data lines"},
		{"only comments", "# a\n// b\n", Options{}, 0, "no data lines"},
		{"no numbers", "time,load\nfoo,bar\n", Options{}, 1, "no line of numbers"},
		{"many bad lines", many, Options{}, 2, "data lines are bad"},
		{"time backwards repeatedly", backwards, Options{}, 4, "backwards on 3 lines"},
		// A 20 g tower cannot hold 5000 kg: the header's kg contradicts the values (grams).
		{"kg header with gram values", "time_s,load_kg\n0,0\n1,2500\n2,5000\n3,0\n", Options{}, 4, "load 5000 kg is implausible"},
		// 50 kg on a 2 g tower is an efficiency of 25000: unit wrong (common practice: model towers score up to a few thousand).
		{"kg with mass", "time_s,load_kg\n0,0\n1,25\n2,50\n", Options{MassG: 2}, 4, "times the structure's"},
		{"index without rate", "0,1\n1,2\n2,3\n", Options{}, 1, "sample index"},
		{"index header without rate", "sample,load_g\n0,1\n1,2\n", Options{}, 2, "sampling rate"},
		{"one sample", "time_s,load_g\n0,1\n", Options{}, 2, "fewer than 2"},
		{"bad unit option", "0,1\n", Options{Unit: "stone"}, 0, "unknown load unit"},
		{"same columns", "0,1\n", Options{TimeColumn: 1, LoadColumn: 1}, 0, "not usable"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, _, err := Parse("bad.csv", strings.NewReader(tt.in), tt.opt)
			var pe *ParseError
			if !errors.As(err, &pe) {
				t.Fatalf("err = %v, want *ParseError", err)
			}
			if pe.Path != "bad.csv" || pe.Line != tt.line || !strings.Contains(err.Error(), tt.msg) {
				t.Errorf("err = %v (line %d), want line %d and %q", err, pe.Line, tt.line, tt.msg)
			}
		})
	}
}

func TestParseDuplicateAndSingleBackwardsSkipped(t *testing.T) {
	var b strings.Builder
	b.WriteString("time_ms,load_g\n")
	for i := 0; i < 50; i++ {
		b.WriteString(itoa(i*10) + "," + itoa(i) + "\n")
		if i == 20 {
			b.WriteString(itoa(i*10) + ",99\n") // duplicate time, line 23
		}
	}
	log, warns, err := Parse("d.csv", strings.NewReader(b.String()), Options{})
	if err != nil {
		t.Fatal(err)
	}
	if log.Len() != 50 || len(warns) != 1 || warns[0].Line != 23 || !strings.Contains(warns[0].Msg, "duplicate") {
		t.Errorf("len %d warnings %v", log.Len(), warns)
	}
}

func TestPeriodOfWholeMillisecondStamps(t *testing.T) {
	// An 80 Hz logger stamping whole milliseconds writes 0, 12, 25, 37, 50, ...
	var b strings.Builder
	b.WriteString("time_ms,load_g\n")
	for k := 0; k < 400; k++ {
		b.WriteString(itoa(int(float64(k)*12.5)) + ",1\n")
	}
	log, _, err := Parse("p.csv", strings.NewReader(b.String()), Options{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(log.PeriodS-0.0125) > 1e-4 {
		t.Errorf("period %g s, want 0.0125 s", log.PeriodS)
	}
}

func TestAt(t *testing.T) {
	log := &Log{TimesS: []float64{0, 1, 2}, LoadG: []float64{0, 10, 30}}
	for _, tt := range []struct {
		t, want float64
		ok      bool
	}{{0, 0, true}, {0.5, 5, true}, {1.5, 20, true}, {2, 30, true}, {-0.1, 0, false}, {2.1, 0, false}} {
		g, ok := log.At(tt.t)
		if ok != tt.ok || (ok && math.Abs(g-tt.want) > 1e-12) {
			t.Errorf("At(%g) = %g, %v; want %g, %v", tt.t, g, ok, tt.want, tt.ok)
		}
	}
}

func itoa(i int) string { return strconv.Itoa(i) }

func FuzzParse(f *testing.F) {
	f.Add("time_ms,load_g\n0,0\n10,100\n20,250\n", "", 0.0)
	f.Add("# c\nt[s] mass [kg]\n0.0 0.5\n0.5 1.25\n", "kg", 0.0)
	f.Add("0,1\n1,2\n2,3\n", "", 100.0)
	f.Add("Zeit [s];Load [N]\n0,00;0,0\n0,01;9,80665\n", "N", 0.0)
	f.Add("timestamp,load_g\n12:00:00.00,1\n12:00:00.25,2\n", "", 0.0)
	f.Add("time_s,load_g\n0,1\n1,1\n0.5,1\n2,NaN\n", "lbf", 0.0)
	f.Fuzz(func(t *testing.T, in, unit string, rate float64) {
		log, _, err := Parse("f.csv", strings.NewReader(in), Options{Unit: unit, RateHz: rate})
		if err != nil {
			var pe *ParseError
			if !errors.As(err, &pe) || pe.Line < 0 {
				t.Fatalf("error %v is not a *ParseError with a line", err)
			}
			return
		}
		n := log.Len()
		if n < 2 || len(log.LoadG) != n || len(log.Lines) != n {
			t.Fatalf("lengths %d %d %d", n, len(log.LoadG), len(log.Lines))
		}
		for i := 0; i < n; i++ {
			if math.IsNaN(log.TimesS[i]) || math.IsInf(log.TimesS[i], 0) || math.IsNaN(log.LoadG[i]) || math.IsInf(log.LoadG[i], 0) {
				t.Fatalf("sample %d not finite: %g %g", i, log.TimesS[i], log.LoadG[i])
			}
			if log.LoadG[i] > MaxPlausibleG {
				t.Fatalf("load %g above the plausible limit", log.LoadG[i])
			}
			if i > 0 && !(log.TimesS[i] > log.TimesS[i-1]) {
				t.Fatalf("times not strictly increasing at %d: %g then %g", i, log.TimesS[i-1], log.TimesS[i])
			}
			if i > 0 && log.Lines[i] <= log.Lines[i-1] {
				t.Fatalf("lines not increasing")
			}
		}
		if !(log.PeriodS > 0) || math.IsInf(log.PeriodS, 0) {
			t.Fatalf("period %g", log.PeriodS)
		}
		if log.Detected == "" {
			t.Fatal("nothing detected")
		}
	})
}

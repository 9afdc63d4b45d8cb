package cli

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/report/analysis"
)

func TestAnalyzeArgsToOptions(t *testing.T) {
	base := []string{"clip.avi", "--marks", "m.yaml", "--out", "rep"}
	tests := []struct {
		name  string
		args  []string
		check func(t *testing.T, o *analyzeOptions)
		code  int
		err   string
	}{
		{name: "minimal", args: base, check: func(t *testing.T, o *analyzeOptions) {
			c := o.cfg
			if c.Clip != "clip.avi" || c.Marks != "m.yaml" || c.Out != "rep" || c.Load != "" || c.Force || c.LoadOffsetS != nil || c.Sync != nil {
				t.Errorf("cfg %+v", c)
			}
		}},
		{name: "all load flags", args: append(base, "--load", "l.csv", "--load-unit", "newton", "--load-time-unit", "ms", "--load-rate", "80",
			"--mass-g", "21.4", "--capture-fps", "960", "--from", "10", "--to", "1.5s", "--force", "--quiet", "--load-offset", "-34.5"),
			check: func(t *testing.T, o *analyzeOptions) {
				c := o.cfg
				if c.Load != "l.csv" || c.LoadOptions.Unit != "N" || c.LoadOptions.TimeUnit != "ms" || c.LoadOptions.RateHz != 80 ||
					c.MassG != 21.4 || c.CaptureFPS != 960 || c.From != "10" || c.To != "1.5s" || !c.Force || !o.quiet ||
					c.LoadOffsetS == nil || *c.LoadOffsetS != -34.5 {
					t.Errorf("cfg %+v", c)
				}
			}},
		{name: "folder of stills", args: append(base, "--image-fps", "2000"), check: func(t *testing.T, o *analyzeOptions) {
			if o.cfg.ImageFPS != 2000 {
				t.Errorf("image fps %g, want 2000", o.cfg.ImageFPS)
			}
		}},
		{name: "zero image rate", args: append(base, "--image-fps", "0"), code: ExitUsage, err: "--image-fps"},
		{name: "sync seconds", args: append(base, "--load", "l.csv", "--sync", "412@35.18"), check: func(t *testing.T, o *analyzeOptions) {
			if s := o.cfg.Sync; s == nil || s.Frame != 412 || s.LogTimeS != 35.18 {
				t.Errorf("sync %+v", s)
			}
		}},
		{name: "sync ms", args: append(base, "--load", "l.csv", "--sync", "7@1250ms"), check: func(t *testing.T, o *analyzeOptions) {
			if s := o.cfg.Sync; s == nil || s.Frame != 7 || s.LogTimeS != 1.25 {
				t.Errorf("sync %+v", s)
			}
		}},
		{name: "no marks", args: []string{"clip.avi", "--out", "rep"}, code: ExitUsage, err: "--marks is required"},
		{name: "no out", args: []string{"clip.avi", "--marks", "m.yaml"}, code: ExitUsage, err: "--out is required"},
		{name: "no clip", args: []string{"--marks", "m.yaml", "--out", "r"}, code: ExitUsage, err: "accepts 1 arg"},
		{name: "offset without load", args: append(base, "--load-offset", "1"), code: ExitUsage, err: "--load-offset needs --load"},
		{name: "offset and sync", args: append(base, "--load", "l.csv", "--load-offset", "1", "--sync", "1@2"), code: ExitUsage, err: "not both"},
		{name: "bad sync", args: append(base, "--load", "l.csv", "--sync", "412"), code: ExitUsage, err: "FRAME@LOGTIME"},
		{name: "bad sync time", args: append(base, "--load", "l.csv", "--sync", "4@soon"), code: ExitUsage, err: "not a number"},
		{name: "bad unit", args: append(base, "--load", "l.csv", "--load-unit", "stone"), code: ExitUsage, err: "--load-unit"},
		{name: "bad from", args: append(base, "--from", "soon"), code: ExitUsage, err: "--from"},
		{name: "fractional to", args: append(base, "--to", "12.5"), code: ExitUsage, err: "--to"},
		{name: "negative mass", args: append(base, "--mass-g", "-2"), code: ExitUsage, err: "--mass-g"},
		// A capture rate given on the command line must be usable: zero,
		// negative, infinite and absurdly high rates are usage errors naming
		// the flag (not a clip error after opening it).
		{name: "zero rate", args: append(base, "--capture-fps", "0"), code: ExitUsage, err: "--capture-fps"},
		{name: "negative rate", args: append(base, "--capture-fps", "-5"), code: ExitUsage, err: "--capture-fps"},
		{name: "infinite rate", args: append(base, "--capture-fps", "inf"), code: ExitUsage, err: "--capture-fps"},
		{name: "rate over a million", args: append(base, "--capture-fps", "2e6"), code: ExitUsage, err: "--capture-fps"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, _ := testIO()
			var got *analyzeOptions
			root := NewRootCmd(io)
			for _, c := range root.Commands() {
				if c.Name() == "analyze" {
					root.RemoveCommand(c)
				}
			}
			root.AddCommand(newAnalyzeCmdWith(io, func(o *analyzeOptions) error { got = o; return nil }))
			root.SetArgs(append([]string{"analyze"}, tt.args...))
			_, err := root.ExecuteC()
			if code := exitCode(err); code != tt.code {
				t.Fatalf("exit %d (%v), want %d", code, err, tt.code)
			}
			if tt.code != ExitOK {
				if err == nil || !strings.Contains(err.Error(), tt.err) {
					t.Errorf("error %v, want %q", err, tt.err)
				}
				return
			}
			tt.check(t, got)
		})
	}
}

func TestAnalyzeBadInputExits3(t *testing.T) {
	dir := t.TempDir()
	marksPath := filepath.Join(dir, "m.yaml")
	os.WriteFile(marksPath, []byte("reference_frame: 0\nscale: {from: A0, to: A1, mm: 15}\npoints:\n  - id: A0\n    px: [10, 20]\n  - id: A1\n    px: [10, 5]\n"), 0o644)
	badLog := filepath.Join(dir, "bad.csv")
	os.WriteFile(badLog, []byte("time_s,load_g\n0,1\n1,x\n2,y\n3,z\n"), 0o644)
	existing := filepath.Join(dir, "old-report")
	os.Mkdir(existing, 0o755)
	tests := []struct {
		name string
		args []string
		err  string
	}{
		{"report folder exists", []string{"c.avi", "--marks", marksPath, "--out", existing}, "--force"},
		{"marks missing", []string{"c.avi", "--marks", filepath.Join(dir, "none.yaml"), "--out", filepath.Join(dir, "r1")}, "none.yaml"},
		{"bad load log", []string{"c.avi", "--marks", marksPath, "--load", badLog, "--out", filepath.Join(dir, "r2")}, "bad.csv line 3"},
		{"clip missing", []string{filepath.Join(dir, "none.avi"), "--marks", marksPath, "--out", filepath.Join(dir, "r3")}, "none.avi"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, errOut := testIO()
			if code := Run(io, append([]string{"analyze"}, tt.args...)); code != ExitBadInput {
				t.Fatalf("exit %d, want %d; stderr %s", code, ExitBadInput, errOut)
			}
			if !strings.Contains(errOut.String(), tt.err) {
				t.Errorf("stderr %q lacks %q", errOut, tt.err)
			}
		})
	}
	if ents, _ := os.ReadDir(existing); len(ents) != 0 {
		t.Error("existing report folder changed")
	}
}

func TestAnalyzeSummaryOutput(t *testing.T) {
	io, out, _ := testIO()
	g := func(v float64) *float64 { return &v }
	r := &report.Result{
		Account: "Brace AB-d2 bowed first.", FirstMember: "AB-d2", FailureMode: "brace_buckling",
		Events:    []report.Event{{Kind: "onset", Member: "AB-d2", Frame: 250, TimeS: 0.2604, LoadG: g(5712)}, {Kind: "collapse", Frame: 392, TimeS: 0.4083}},
		Alignment: &report.Alignment{Method: "auto", OffsetS: -34.95, UncertaintyS: 0.0125},
		PeakLoadG: g(6350), Efficiency: g(296.7),
	}
	printSummary(&analyzeOptions{io: io, cfg: analysis.Config{Out: "rep"}}, r)
	want := `Brace AB-d2 bowed first.
first member: AB-d2
failure mode: brace_buckling
  onset        AB-d2      frame    250    0.2604 s  5712 g
  collapse                frame    392    0.4083 s
load offset: -34.9500 s ± 0.0125 s (auto)
peak load: 6350 g
efficiency: 297 (load held / mass)
report: rep/report.html
`
	if out.String() != want {
		t.Errorf("output:\n%s\nwant:\n%s", out, want)
	}
}

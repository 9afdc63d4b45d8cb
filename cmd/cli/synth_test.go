package cli

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/spf13/pflag"

	"github.com/failframe/failframe/capture/synth"
)

func TestSynthFlagsToOptions(t *testing.T) {
	tests := []struct {
		name  string
		args  []string
		check func(*testing.T, *synthOptions)
	}{
		{"defaults are the demo", []string{"--out", "d"}, func(t *testing.T, o *synthOptions) {
			want := synth.Default()
			if o.out != "d" || o.scenario != want {
				t.Errorf("got out %q scenario %+v, want the default", o.out, o.scenario)
			}
		}},
		{"every knob", []string{"--out", "x", "--seed", "11", "--bracing", "X", "--levels", "5", "--base-mm", "120",
			"--top-mm", "50", "--height-mm", "350", "--width", "800", "--height", "600", "--focal-px", "700",
			"--distance-mm", "900", "--camera-height-mm", "200", "--azimuth-deg", "-30", "--capture-fps", "480",
			"--container-fps", "24", "--frames", "300", "--onset-frame", "100", "--break-frame", "200",
			"--collapse-frame", "210", "--fail", "BC-x2b", "--twist-deg", "1.5", "--sway-mm", "2", "--noise", "3",
			"--flicker", "0.05", "--blur-px", "0.8", "--mass-g", "18.2", "--peak-load-g", "5000", "--cord-mm", "3", "--shake-px", "2.5", "--k1", "-0.1", "--no-mp4", "--leg-mid-markers=false"},
			func(t *testing.T, o *synthOptions) {
				s := o.scenario
				if s.Seed != 11 || s.Bracing != "x" || s.Levels != 5 || s.BaseMM != 120 || s.TopMM != 50 || s.HeightMM != 350 ||
					s.Width != 800 || s.Height != 600 || s.FocalPX != 700 || s.DistanceMM != 900 || s.CameraHeightMM != 200 ||
					s.AzimuthDeg != -30 || s.CaptureFPS != 480 || s.ContainerFPS != 24 || s.Frames != 300 ||
					s.OnsetFrame != 100 || s.BreakFrame != 200 || s.CollapseFrame != 210 || s.Fail != "BC-x2b" ||
					s.TwistDeg != 1.5 || s.SwayMM != 2 || s.Noise != 3 || s.Flicker != 0.05 || s.BlurPX != 0.8 ||
					s.MassG != 18.2 || s.PeakLoadG != 5000 || s.CordMM != 3 || s.ShakePX != 2.5 || s.K1 != -0.1 || !s.SkipMP4 || s.LegMidMarkers {
					t.Errorf("scenario %+v", s)
				}
			}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, _ := testIO()
			var got *synthOptions
			cmd := newSynthCmdWith(io, func(o *synthOptions) error { got = o; return nil })
			cmd.SetArgs(tt.args)
			if err := cmd.Execute(); err != nil {
				t.Fatal(err)
			}
			tt.check(t, got)
		})
	}
}

func TestSynthBadOptionsExit2(t *testing.T) {
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"no out", []string{"synth"}, "--out is required"},
		{"negative rate", []string{"synth", "--out", "o", "--capture-fps", "-960"}, "capture rate -960"},
		{"onset after collapse", []string{"synth", "--out", "o", "--onset-frame", "450", "--collapse-frame", "400"}, "onset frame 450 is not before the collapse frame 400"},
		{"unknown pattern", []string{"synth", "--out", "o", "--bracing", "k-brace"}, `unknown bracing pattern "k-brace"`},
		{"unknown member", []string{"synth", "--out", "o", "--fail", "AB-q9"}, `unknown member "AB-q9"`},
		{"unknown joint", []string{"synth", "--out", "o", "--fail", "joint-Q1"}, `unknown joint "joint-Q1"`},
		{"leg panel above the top", []string{"synth", "--out", "o", "--fail", "leg-B:5"}, `unknown leg panel "leg-B:5"`},
		{"leg panel not a number", []string{"synth", "--out", "o", "--fail", "leg-B:two"}, `unknown leg panel "leg-B:two"`},
		{"tower off the frame", []string{"synth", "--out", "o", "--focal-px", "3000"}, "does not fit"},
		{"not a number", []string{"synth", "--out", "o", "--frames", "many"}, "invalid argument"},
		{"stray argument", []string{"synth", "--out", "o", "extra"}, "accepts 0 arg"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, errOut := testIO()
			if code := Run(io, tt.args); code != ExitUsage {
				t.Errorf("exit %d, want %d", code, ExitUsage)
			}
			if !strings.Contains(errOut.String(), tt.want) {
				t.Errorf("stderr %q lacks %q", errOut, tt.want)
			}
		})
	}
}

func TestSynthWritesFolder(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "clip")
	io, out, errOut := testIO()
	args := []string{"synth", "--out", dir, "--width", "240", "--height", "180", "--focal-px", "277.5",
		"--marker-mm", "8", "--frames", "20", "--onset-frame", "6", "--break-frame", "12", "--collapse-frame", "14", "--no-mp4"}
	if code := Run(io, args); code != ExitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	for _, name := range []string{synth.ClipAVI, synth.TruthFile, synth.MarksFile, synth.LoadFile} {
		if _, err := os.Stat(filepath.Join(dir, name)); err != nil {
			t.Error(err)
		}
		if !strings.Contains(out.String(), filepath.Join(dir, name)) {
			t.Errorf("stdout does not name %s:\n%s", name, out)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, synth.ClipMP4)); err == nil {
		t.Error("tower.mp4 written despite --no-mp4")
	}
	if !strings.Contains(out.String(), "first member AB-d1 (brace_buckling)") {
		t.Errorf("summary missing:\n%s", out)
	}
}

func TestSynthHelpDocumentsEveryOption(t *testing.T) {
	io, out, _ := testIO()
	if code := Run(io, []string{"synth", "--help"}); code != ExitOK {
		t.Fatalf("exit %d", code)
	}
	help := out.String()
	cmd := newSynthCmd(io)
	cmd.Flags().VisitAll(func(f *pflag.Flag) {
		var line string
		for _, l := range strings.Split(help, "\n") {
			if strings.Contains(l, "--"+f.Name+" ") {
				line = l
			}
		}
		if line == "" {
			t.Errorf("--%s missing from the help", f.Name)
			return
		}
		switch f.Name {
		case "help", "out", "no-mp4", "fail":
			return
		}
		if !strings.Contains(line, "default") {
			t.Errorf("--%s help does not state its default: %q", f.Name, line)
		}
	})
	for _, want := range []string{"horizontal", "diagonal", "z", "x", "truth.json", "marks.yaml", "load.csv", "Exit status"} {
		if !strings.Contains(help, want) {
			t.Errorf("help lacks %q", want)
		}
	}
}

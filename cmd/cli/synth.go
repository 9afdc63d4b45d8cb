package cli

import (
	"fmt"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"github.com/failframe/failframe/capture/synth"
)

func init() { commands = append(commands, newSynthCmd) }

// synthOptions are the options of `failframe synth`.
type synthOptions struct {
	io       *IOStreams
	out      string
	scenario synth.Scenario
}

func newSynthCmd(io *IOStreams) *cobra.Command {
	return newSynthCmdWith(io, synthRun)
}

func newSynthCmdWith(io *IOStreams, runF func(*synthOptions) error) *cobra.Command {
	opts := &synthOptions{io: io, scenario: synth.Default()}
	s := &opts.scenario
	cmd := &cobra.Command{
		Use:   "synth --out DIR [flags]",
		Short: "Render a synthetic load-test clip of a model tower with exact ground truth",
		Long: `Render a slow-motion clip of an invented model tower loaded to failure,
with its exact ground truth, to try failframe out and to check its numbers.

The tower is square and tapered with legs A-D counter-clockwise seen from
above and levels 0 (base) to n (top). Bracing patterns: horizontal (horizontals
at every level only), diagonal (one diagonal per panel, alternating, with a top
ring), z (horizontals and one diagonal per panel) and x (crossed diagonals
glued at the crossing, with a top ring). One member bows from the onset frame
until it breaks (or a joint creeps and lets go, or the whole tower twists),
then the tower collapses.

The output folder gets:
  tower.avi    Motion JPEG clip (stored at --container-fps)
  tower.mp4    H.264 copy, when the ffmpeg program is installed
  truth.json   image position of every point in every frame, twist, sway and
               settlement per level, chord and bow per member, the failure
               events, and the load log's clock offset
  marks.yaml   the marked points and members for the clip (frame 0); legs
               are marked at every level and, unless --leg-mid-markers=false,
               at mid-panel (leg-A-mid2 is leg A half-way between levels 1
               and 2)
  load.csv     load-cell log: time_ms since the logger started, load_g

The same --seed gives the same clip, bit for bit.
` + exitHelp,
		Example: `  failframe synth --out demo-out/clip --seed 7
  failframe synth --out /tmp/h --bracing horizontal --frames 300 --onset-frame 120 --break-frame 200 --collapse-frame 210
  failframe synth --out /tmp/leg --bracing z --fail leg-B:2`,
		Args: exactArgs(0),
		RunE: func(cmd *cobra.Command, args []string) error {
			if opts.out == "" {
				return &FlagError{Err: fmt.Errorf("--out is required: the folder to write the clip into")}
			}
			if cmd.Flags().Changed("bracing") {
				s.Bracing = strings.ToLower(s.Bracing)
			}
			if err := s.Validate(); err != nil {
				return &FlagError{Err: err}
			}
			return runF(opts)
		},
	}
	f := cmd.Flags()
	f.StringVar(&opts.out, "out", "", "folder to write tower.avi, tower.mp4, truth.json, marks.yaml and load.csv into (required)")
	f.Int64Var(&s.Seed, "seed", s.Seed, "seed for textures, noise, the load log and random choices")
	f.StringVar(&s.Bracing, "bracing", s.Bracing, "bracing pattern: horizontal, diagonal, z or x")
	f.IntVar(&s.Levels, "levels", s.Levels, "number of braced levels above the base (panels)")
	f.Float64Var(&s.BaseMM, "base-mm", s.BaseMM, "tower width at the base, leg centre to leg centre, mm")
	f.Float64Var(&s.TopMM, "top-mm", s.TopMM, "tower width at the top, mm")
	f.Float64Var(&s.HeightMM, "height-mm", s.HeightMM, "tower height from base to top level, mm")
	f.Float64Var(&s.LegMM, "leg-mm", s.LegMM, "leg section (square), mm")
	f.Float64Var(&s.BraceMM, "brace-mm", s.BraceMM, "brace section (square), mm")
	f.Float64Var(&s.MarkerMM, "marker-mm", s.MarkerMM, "diameter of the dark marker dots, mm")
	f.IntVar(&s.Width, "width", s.Width, "frame width, px (even)")
	f.IntVar(&s.Height, "height", s.Height, "frame height, px (even)")
	f.Float64Var(&s.FocalPX, "focal-px", s.FocalPX, "camera focal length, px")
	f.Float64Var(&s.DistanceMM, "distance-mm", s.DistanceMM, "horizontal distance from the tower axis to the camera, mm")
	f.Float64Var(&s.CameraHeightMM, "camera-height-mm", s.CameraHeightMM, "camera height above the base, mm")
	f.Float64Var(&s.AzimuthDeg, "azimuth-deg", s.AzimuthDeg, "camera direction from face A-B's outward normal, degrees counter-clockwise seen from above")
	f.Float64Var(&s.K1, "k1", s.K1, "lens radial distortion coefficient, OpenCV k1, negative = barrel (default 0 = none)")
	f.Float64Var(&s.CaptureFPS, "capture-fps", s.CaptureFPS, "true capture rate, frames per second")
	f.Float64Var(&s.ContainerFPS, "container-fps", s.ContainerFPS, "playback rate stored in the clip files, frames per second")
	f.IntVar(&s.Frames, "frames", s.Frames, "number of frames")
	f.IntVar(&s.OnsetFrame, "onset-frame", s.OnsetFrame, "frame where the failing member's bow passes 0.5 % of its length (twist failure: where the twist runs away)")
	f.IntVar(&s.BreakFrame, "break-frame", s.BreakFrame, "first frame showing the failing member broken")
	f.IntVar(&s.CollapseFrame, "collapse-frame", s.CollapseFrame, "first frame of the global collapse (which takes about 0.05 s of capture)")
	f.StringVar(&s.Fail, "fail", s.Fail, `member that buckles first (e.g. AB-d1, AB-x1a, leg-B), leg-<leg>:<panel> for a leg buckling between two braced levels (leg-B:2: leg B between levels 1 and 2; plain leg-B is panel 1, or the full height with horizontal bracing), "twist" for a tower that twists as a whole, joint-<leg><level> for a glued joint that lets go (joint-B2: its braces come off; joint-A0: leg A's foot slides off the base), or empty for the pattern's default (a long diagonal on the face toward the camera; for horizontal bracing the leg nearest the camera over its full height)`)
	f.BoolVar(&s.LegMidMarkers, "leg-mid-markers", s.LegMidMarkers, "mark each visible leg at mid-panel too (points leg-A-mid1 .. between levels), so a leg buckling between braces shows; --leg-mid-markers=false marks legs at the braced levels only")
	f.Float64Var(&s.TwistDeg, "twist-deg", s.TwistDeg, "top twist when the first member breaks (--fail twist: at collapse), degrees counter-clockwise from above; negative = pattern default (6 for horizontal bracing or --fail twist, else 0.8)")
	f.Float64Var(&s.SwayMM, "sway-mm", s.SwayMM, "top sway when the first member breaks (--fail twist: at collapse), mm")
	f.Float64Var(&s.Noise, "noise", s.Noise, "sensor noise, standard deviation in 8-bit grey levels at mid grey (grows with brightness)")
	f.Float64Var(&s.Flicker, "flicker", s.Flicker, "light flicker, relative amplitude (0.03 = 3 %)")
	f.Float64Var(&s.BlurPX, "blur-px", s.BlurPX, "lens blur, standard deviation in px")
	f.Float64Var(&s.MassG, "mass-g", s.MassG, "tower mass, g")
	f.Float64Var(&s.PeakLoadG, "peak-load-g", s.PeakLoadG, "load at collapse (the log's peak), g")
	f.Float64Var(&s.CordMM, "cord-mm", s.CordMM, "thickness of a dark cord swinging between the camera and the tower, hiding markers now and then, mm (default 0 = no cord)")
	f.Float64Var(&s.ShakePX, "shake-px", s.ShakePX, "peak camera shake when the falling load hits the floor, px (default 0 = still camera)")
	f.BoolVar(&s.SkipMP4, "no-mp4", s.SkipMP4, "do not write tower.mp4 even when ffmpeg is installed")
	return cmd
}

func synthRun(opts *synthOptions) error {
	s := opts.scenario
	errOut := opts.io.ErrOut
	last := -1
	progress := func(done, total int) {
		if !opts.io.ErrIsTerminal {
			return
		}
		pct := done * 100 / total
		if pct != last {
			last = pct
			fmt.Fprintf(errOut, "\rrendering %d/%d frames (%d%%)", done, total, pct)
			if done == total {
				fmt.Fprintln(errOut)
			}
		}
	}
	fmt.Fprintf(errOut, "rendering %d frames of %dx%d into %s\n", s.Frames, s.Width, s.Height, opts.out)
	truth, err := synth.Write(s, opts.out, progress)
	if err != nil {
		return err
	}
	out := opts.io.Out
	fmt.Fprintf(out, "wrote %s\n", filepath.Join(opts.out, synth.ClipAVI))
	if !s.SkipMP4 {
		if synth.FFmpegPath() != "" {
			fmt.Fprintf(out, "wrote %s\n", filepath.Join(opts.out, synth.ClipMP4))
		} else {
			fmt.Fprintf(errOut, "note: ffmpeg not found, %s not written\n", synth.ClipMP4)
		}
	}
	for _, name := range []string{synth.TruthFile, synth.MarksFile, synth.LoadFile} {
		fmt.Fprintf(out, "wrote %s\n", filepath.Join(opts.out, name))
	}
	first := truth.FirstMember
	if first == "" {
		first = "(none: the tower twists)"
	}
	fmt.Fprintf(out, "%d frames %dx%d, captured at %g fps, stored at %g fps; %s bracing; first member %s (%s), onset frame %d, break frame %d, collapse frame %d; peak load %.0f g, efficiency %.0f\n",
		truth.Frames, truth.Width, truth.Height, truth.CaptureFPS, truth.ContainerFPS, truth.Bracing,
		first, truth.FailureMode, truth.OnsetFrame, truth.BreakFrame, truth.CollapseFrame, truth.PeakLoadG, truth.Efficiency)
	fmt.Fprintf(errOut, "next: failframe analyze %s --marks %s --load %s --mass-g %g --out REPORT-FOLDER\n",
		filepath.Join(opts.out, synth.ClipAVI), filepath.Join(opts.out, synth.MarksFile), filepath.Join(opts.out, synth.LoadFile), s.MassG)
	return nil
}

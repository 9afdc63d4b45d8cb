package cli

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/tracking"
	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

func init() { commands = append(commands, newTrackCmd) }

// trackOptions are the options of `failframe track`.
type trackOptions struct {
	io         *IOStreams
	clip       string
	marks      string
	out        string
	captureFPS float64
	imageFPS   float64
	from       string // frame number or real seconds ("1.25s"); empty = 0
	to         string // frame number or real seconds; empty = end
	quiet      bool
}

func newTrackCmd(io *IOStreams) *cobra.Command {
	return newTrackCmdWith(io, trackRun)
}

func newTrackCmdWith(io *IOStreams, runF func(*trackOptions) error) *cobra.Command {
	opts := &trackOptions{io: io}
	cmd := &cobra.Command{
		Use:   "track CLIP --marks FILE --out DIR [flags]",
		Short: "Track the marked points through a clip and write points.csv",
		Long: `Track the points of a marks file through a clip, to a small fraction of a
pixel, and write DIR/points.csv: one row per frame and point with the frame,
real time, point id, position in pixels, displacement from the marked
position in millimetres (when the marks give a scale; y positive down), a
quality figure from 0 to 1 and a lost flag.

A point is lost when it can no longer be matched with confidence to its
patch in the reference frame (it broke away, left the frame or was hidden);
its position columns are then empty. A lost point is taken up again only on
a strong match near where it was lost.

--from and --to take a frame number (120) or real seconds (1.25s); real time
is frame / capture rate, from --capture-fps, else capture_fps in the marks
file, else the container's rate (with a warning). points.csv is written
whole or not at all; on success a table of the points goes to standard
output.` + exitHelp,
		Example: `  failframe track tower.mp4 --marks marks.yaml --out run1
  failframe track tower.mp4 --marks marks.yaml --out run1 --capture-fps 960 --from 0.5s --to 2s`,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.clip = args[0]
			switch {
			case opts.marks == "":
				return &FlagError{Err: errors.New("--marks is required: the marks file naming the points to track")}
			case opts.out == "":
				return &FlagError{Err: errors.New("--out is required: the folder to write points.csv into")}
			}
			if err := checkRateFlags(cmd, opts.captureFPS, opts.imageFPS); err != nil {
				return err
			}
			// Check the positions' form now; seconds become frames once
			// the rate is known.
			loose := capture.Timebase{CaptureFPS: 1}
			for _, p := range []struct{ name, v string }{{"from", opts.from}, {"to", opts.to}} {
				if p.v == "" {
					continue
				}
				if _, err := capture.ParsePosition(p.v, loose); err != nil {
					return &FlagError{Err: fmt.Errorf("--%s: %w", p.name, err)}
				}
			}
			return runF(opts)
		},
	}
	f := cmd.Flags()
	f.StringVar(&opts.marks, "marks", "", "marks file (YAML) naming the points to track (required)")
	f.StringVar(&opts.out, "out", "", "folder to write points.csv into (required; made if missing)")
	f.Float64Var(&opts.captureFPS, "capture-fps", 0, "true capture rate of the camera, frames per second (default: the marks file's, else the container's)")
	f.Float64Var(&opts.imageFPS, "image-fps", 0, "rate of a folder of stills, frames per second")
	f.StringVar(&opts.from, "from", "", "first frame to track: a frame number or real seconds like 1.25s (default: the start)")
	f.StringVar(&opts.to, "to", "", "last frame to track, included: a frame number or real seconds (default: the end)")
	f.BoolVarP(&opts.quiet, "quiet", "q", false, "no progress bar")
	return cmd
}

// withMarksPath fills in the marks file's path on a marks error.
func withMarksPath(err error, path string) error {
	var me *marks.Error
	if errors.As(err, &me) && me.Path == "" {
		me.Path = path
	}
	return err
}

func trackRun(opts *trackOptions) error {
	m, err := marks.Load(opts.marks)
	if err != nil {
		return err
	}
	src, err := capture.Open(opts.clip, capture.Options{ImageFPS: opts.imageFPS})
	if err != nil {
		return err
	}
	defer src.Close()
	info := src.Info()
	for _, w := range info.Warnings {
		fmt.Fprintf(opts.io.ErrOut, "warning: %s\n", w)
	}
	tb, warn, err := capture.ChooseRate(opts.captureFPS, m.CaptureFPS, info.ContainerFPS)
	if err != nil {
		return &InputError{Err: fmt.Errorf("clip %s: %w; give --capture-fps", opts.clip, err)}
	}
	if warn != "" {
		fmt.Fprintf(opts.io.ErrOut, "warning: %s\n", warn)
	}
	if err := m.CheckBounds(info.Width, info.Height); err != nil {
		return withMarksPath(err, opts.marks)
	}
	rng := tracking.Range{From: 0, To: -1}
	if opts.from != "" {
		if rng.From, err = capture.ParsePosition(opts.from, tb); err != nil {
			return &FlagError{Err: fmt.Errorf("--from: %w", err)}
		}
	}
	if opts.to != "" {
		if rng.To, err = capture.ParsePosition(opts.to, tb); err != nil {
			return &FlagError{Err: fmt.Errorf("--to: %w", err)}
		}
		if rng.To < rng.From {
			return &FlagError{Err: fmt.Errorf("--to %s (frame %d) is before --from (frame %d)", opts.to, rng.To, rng.From)}
		}
	}
	if info.FrameCount > 0 {
		if rng.From >= info.FrameCount {
			return &InputError{Err: fmt.Errorf("clip %s: --from frame %d is past the end (frames 0 to %d)", opts.clip, rng.From, info.FrameCount-1)}
		}
		if m.ReferenceFrame >= info.FrameCount {
			return withMarksPath(&marks.Error{Err: fmt.Errorf("reference_frame %d is past the end of clip %s (frames 0 to %d)", m.ReferenceFrame, opts.clip, info.FrameCount-1)}, opts.marks)
		}
	}
	total := 0
	if info.FrameCount > 0 {
		last := info.FrameCount - 1
		if rng.To >= 0 && rng.To < last {
			last = rng.To
		}
		total = last - rng.From + 1
	}
	update, finish := newProgress(opts.io, opts.quiet, total, "tracking")
	tr, err := tracking.Track(src, m, tracking.DefaultOptions(), rng, tracking.Hooks{Progress: update,
		Warn: func(msg string) { fmt.Fprintf(opts.io.ErrOut, "warning: %s\n", msg) }})
	finish()
	if err != nil {
		return withMarksPath(err, opts.marks)
	}
	mmPerPx, _ := m.MMPerPixel()
	if err := os.MkdirAll(opts.out, 0o755); err != nil {
		return fmt.Errorf("track: %w", err)
	}
	path := filepath.Join(opts.out, "points.csv")
	if err := writeStreamAtomic(path, func(f *os.File) error { return tracks.WriteCSV(f, tr, tb.CaptureFPS, mmPerPx) }); err != nil {
		return err
	}
	printTrackSummary(opts, tr, tb)
	fmt.Fprintf(opts.io.ErrOut, "wrote %s (%d points, frames %d to %d, %s fps from %s)\n",
		path, len(tr.IDs), tr.Frames[0], tr.Frames[len(tr.Frames)-1], fmtNum(tb.CaptureFPS), tb.From)
	return nil
}

// printTrackSummary writes one line per point: how much of the run it was
// tracked, its lowest quality, and where it was first lost.
func printTrackSummary(opts *trackOptions, tr *tracks.Tracks, tb capture.Timebase) {
	w := tabwriter.NewWriter(opts.io.Out, 0, 4, 2, ' ', 0)
	fmt.Fprintln(w, "point\ttracked\tmin_quality\tfirst_lost_frame\tfirst_lost_s")
	for j, id := range tr.IDs {
		ok, minQ, lost := 0, math.Inf(1), -1
		for i, row := range tr.Samples {
			s := row[j]
			if s.Lost {
				if lost < 0 {
					lost = tr.Frames[i]
				}
				continue
			}
			ok++
			minQ = math.Min(minQ, s.Quality)
		}
		q := "-"
		if ok > 0 {
			q = fmt.Sprintf("%.3f", minQ)
		}
		lf, ls := "-", "-"
		if lost >= 0 {
			lf, ls = fmt.Sprint(lost), fmt.Sprintf("%.6f", tb.Time(lost))
		}
		fmt.Fprintf(w, "%s\t%.1f%%\t%s\t%s\t%s\n", id, 100*float64(ok)/float64(len(tr.Frames)), q, lf, ls)
	}
	w.Flush()
}

// writeStreamAtomic writes path through a temporary file in the same folder
// and a rename, so that a failure leaves any earlier file whole.
func writeStreamAtomic(path string, write func(*os.File) error) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	defer os.Remove(tmp.Name())
	if err := write(tmp); err != nil {
		tmp.Close()
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}

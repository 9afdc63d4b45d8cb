package cli

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"github.com/failframe/failframe/capture"
)

func init() { commands = append(commands, newProbeCmd) }

// probeOptions are the options of `failframe probe`.
type probeOptions struct {
	io         *IOStreams
	clip       string
	captureFPS float64
	imageFPS   float64
	count      bool
	json       bool
	quiet      bool
}

// probeReport is what probe prints; with --json it is written as is.
type probeReport struct {
	Clip            string   `json:"clip"`
	Width           int      `json:"width"`
	Height          int      `json:"height"`
	Codec           string   `json:"codec"`
	ContainerFPS    float64  `json:"container_fps"`
	Frames          int      `json:"frames"`
	CountSource     string   `json:"count_source"`
	StoredDurationS *float64 `json:"stored_duration_s"`
	CaptureFPS      float64  `json:"capture_fps"`
	CaptureFPSFrom  string   `json:"capture_fps_from"`
	RealDurationS   float64  `json:"real_duration_s"`
	Scanned         bool     `json:"scanned"`
	Decoded         int      `json:"decoded"`
	BadFrames       []int    `json:"bad_frames"`
	EndsEarlyAt     *int     `json:"ends_early_at"`
	Problems        []string `json:"problems"`
	Warnings        []string `json:"warnings"`

	containerFrames int // the count the container states
}

func newProbeCmd(io *IOStreams) *cobra.Command {
	return newProbeCmdWith(io, probeRun)
}

func newProbeCmdWith(io *IOStreams, runF func(*probeOptions) error) *cobra.Command {
	opts := &probeOptions{io: io}
	cmd := &cobra.Command{
		Use:   "probe CLIP",
		Short: "Describe a clip: size, codec, rates, frame count, length and bad frames",
		Long: `Describe a clip (a video file or a folder of numbered stills): frame size,
codec, the rate stored in the container, the number of frames and how it was
found, the length as stored and in real time, and which frames are missing or
cannot be decoded.

Slow-motion cameras store clips at a playback rate (often 24-30 fps) far
below the rate they film at (240-1000+ fps). Real time is frame / capture
rate; give the capture rate with --capture-fps, else the container's rate is
used and real times are likely wrong.

The frame count comes from the container. With --count, or when the
container has none, every frame is decoded: that finds the true count and
every missing or undecodable frame. The exit status is 3 when that scan
finds bad frames or a clip shorter than its container says.
` + exitHelp,
		Example: `  failframe probe tower.mp4 --capture-fps 960
  failframe probe stills/ --image-fps 2000 --json
  failframe probe tower.mp4 --count`,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.clip = args[0]
			if err := checkRateFlags(cmd, opts.captureFPS, opts.imageFPS); err != nil {
				return err
			}
			return runF(opts)
		},
	}
	f := cmd.Flags()
	f.Float64Var(&opts.captureFPS, "capture-fps", 0, "true capture rate of the camera, frames per second (default: the container's rate, with a warning)")
	f.Float64Var(&opts.imageFPS, "image-fps", 0, "rate of a folder of stills, frames per second")
	f.BoolVar(&opts.count, "count", false, "decode every frame to count them and find bad ones")
	f.BoolVar(&opts.json, "json", false, "write the description as JSON")
	f.BoolVarP(&opts.quiet, "quiet", "q", false, "no progress bar")
	return cmd
}

// checkRateFlags rejects capture and image rates that cannot be right,
// including an explicit 0.
func checkRateFlags(cmd *cobra.Command, captureFPS, imageFPS float64) error {
	for _, r := range []struct {
		name string
		v    float64
	}{{"capture-fps", captureFPS}, {"image-fps", imageFPS}} {
		if !cmd.Flags().Changed(r.name) {
			continue
		}
		if err := capture.CheckRate(r.v); err != nil {
			return &FlagError{Err: fmt.Errorf("--%s: %w", r.name, err)}
		}
	}
	return nil
}

func probeRun(opts *probeOptions) error {
	update, finish := newProgress(opts.io, opts.quiet, 0, "counting frames of "+opts.clip)
	src, err := capture.Open(opts.clip, capture.Options{ImageFPS: opts.imageFPS, Progress: update})
	finish()
	if err != nil {
		return err
	}
	defer src.Close()
	info := src.Info()
	rep := probeReport{
		Clip:         info.Path,
		Width:        info.Width,
		Height:       info.Height,
		Codec:        info.Codec,
		ContainerFPS: info.ContainerFPS,
		Frames:       info.FrameCount,
		CountSource:  info.CountSource,

		containerFrames: info.FrameCount,
		BadFrames:       []int{},
		Problems:        []string{},
		Warnings:        append([]string{}, info.Warnings...),
	}
	if info.ContainerFPS > 0 {
		d := float64(info.FrameCount) / info.ContainerFPS
		rep.StoredDurationS = &d
	}
	if opts.count || info.CountSource == "counted" {
		update, finish := newProgress(opts.io, opts.quiet, info.FrameCount, "decoding "+opts.clip)
		res, err := capture.Scan(src, update)
		finish()
		if err != nil {
			return err
		}
		rep.Scanned = true
		rep.Decoded = res.Decoded
		rep.BadFrames = res.BadFrames()
		for _, e := range res.Bad {
			rep.Problems = append(rep.Problems, e.Error())
		}
		if res.Short != nil {
			f := res.Short.Frame
			rep.EndsEarlyAt = &f
		}
		if res.Frames != info.FrameCount && info.CountSource == "container" && res.Short == nil {
			rep.Warnings = append(rep.Warnings, fmt.Sprintf("the container lists %d frames; decoding found %d", info.FrameCount, res.Frames))
		}
		rep.Frames = res.Frames
		rep.CountSource = "counted"
	}
	tb, warn, err := chooseClipRate(opts.captureFPS, opts.imageFPS, info)
	switch {
	case err != nil:
		rep.Warnings = append(rep.Warnings, "no capture rate: give --capture-fps to get real times")
	case warn != "":
		rep.Warnings = append(rep.Warnings, warn)
		fallthrough
	default:
		rep.CaptureFPS = tb.CaptureFPS
		rep.CaptureFPSFrom = tb.From
		rep.RealDurationS = tb.Time(rep.Frames)
	}

	for _, w := range rep.Warnings {
		fmt.Fprintf(opts.io.ErrOut, "warning: %s\n", w)
	}
	if opts.json {
		enc := json.NewEncoder(opts.io.Out)
		enc.SetIndent("", "  ")
		if err := enc.Encode(rep); err != nil {
			return err
		}
	} else {
		writeProbe(opts.io.Out, &rep)
	}
	var parts []string
	if n := len(rep.BadFrames); n > 0 {
		parts = append(parts, fmt.Sprintf("%d %s missing or undecodable (%s)", n, plural(n, "frame", "frames"), frameRanges(rep.BadFrames, 10)))
	}
	if rep.EndsEarlyAt != nil {
		parts = append(parts, endsEarly(&rep))
	}
	if len(parts) > 0 {
		return &InputError{Err: fmt.Errorf("clip %s: %s", opts.clip, strings.Join(parts, "; "))}
	}
	return nil
}

// endsEarly says where a short clip ends.
func endsEarly(r *probeReport) string {
	return fmt.Sprintf("the stream ends at frame %d but the container lists %d frames (truncated or damaged)", *r.EndsEarlyAt, r.containerFrames)
}

// writeProbe prints the report for people.
func writeProbe(w io.Writer, r *probeReport) {
	line := func(k, format string, a ...any) { fmt.Fprintf(w, "%-15s %s\n", k, fmt.Sprintf(format, a...)) }
	line("clip", "%s", r.Clip)
	line("size", "%dx%d", r.Width, r.Height)
	line("codec", "%s", r.Codec)
	if r.ContainerFPS > 0 {
		line("container rate", "%s fps", fmtNum(r.ContainerFPS))
	} else {
		line("container rate", "unknown")
	}
	how := "stated by the container"
	if r.Scanned {
		how = "counted by decoding every frame"
	}
	line("frames", "%d (%s)", r.Frames, how)
	if r.ContainerFPS > 0 {
		line("stored length", "%.3f s at %s fps", float64(r.Frames)/r.ContainerFPS, fmtNum(r.ContainerFPS))
	}
	if r.CaptureFPS > 0 {
		from := map[string]string{capture.RateFromFlag: "--capture-fps", rateFromImageFPS: "--image-fps",
			capture.RateFromContainer: "the container rate: real times may be wrong"}[r.CaptureFPSFrom]
		line("real length", "%s s at %s fps capture (%s)", fmtNum(r.RealDurationS), fmtNum(r.CaptureFPS), from)
	} else {
		line("real length", "unknown (give --capture-fps)")
	}
	switch {
	case !r.Scanned:
		line("bad frames", "not checked (--count decodes every frame)")
	case len(r.BadFrames) == 0:
		line("bad frames", "none (%d of %d frames decoded)", r.Decoded, r.Frames)
	default:
		line("bad frames", "%d (%s); %d of %d frames decoded", len(r.BadFrames), frameRanges(r.BadFrames, 20), r.Decoded, r.Frames)
		for i, p := range r.Problems {
			if i == 10 {
				fmt.Fprintf(w, "  ... and %d more\n", len(r.Problems)-10)
				break
			}
			fmt.Fprintf(w, "  %s\n", p)
		}
	}
	if r.EndsEarlyAt != nil {
		line("ends early", "%s", endsEarly(r))
	}
}

// frameRanges writes frame numbers as ranges, "49-52, 76", at most max
// ranges before "...".
func frameRanges(frames []int, max int) string {
	if len(frames) == 0 {
		return "none"
	}
	var parts []string
	for i := 0; i < len(frames); {
		j := i
		for j+1 < len(frames) && frames[j+1] == frames[j]+1 {
			j++
		}
		if len(parts) == max {
			parts = append(parts, "...")
			break
		}
		if j > i {
			parts = append(parts, fmt.Sprintf("%d-%d", frames[i], frames[j]))
		} else {
			parts = append(parts, strconv.Itoa(frames[i]))
		}
		i = j + 1
	}
	return strings.Join(parts, ", ")
}

// fmtNum prints a number to at most 6 decimals, without trailing zeros.
func fmtNum(v float64) string { return strconv.FormatFloat(math.Round(v*1e6)/1e6, 'f', -1, 64) }

// plural picks the word for n things.
func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// rateFromImageFPS says the capture rate is the rate given for a folder of
// stills.
const rateFromImageFPS = "image-fps"

// chooseClipRate is capture.ChooseRate for commands without a marks file.
// For a folder of stills the rate given with --image-fps is the rate the
// stills were taken at, so it serves as the capture rate without a warning.
func chooseClipRate(captureFPS, imageFPS float64, info capture.Info) (capture.Timebase, string, error) {
	if captureFPS == 0 && imageFPS > 0 && info.ContainerFPS == imageFPS && isStills(info) {
		return capture.Timebase{CaptureFPS: imageFPS, From: rateFromImageFPS}, "", nil
	}
	return capture.ChooseRate(captureFPS, 0, info.ContainerFPS)
}

// isStills reports whether the clip is a folder of stills.
func isStills(info capture.Info) bool {
	st, err := os.Stat(info.Path)
	return err == nil && st.IsDir()
}

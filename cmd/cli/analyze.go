package cli

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/report/analysis"
	"github.com/failframe/failframe/report/loadlog"
)

func init() { commands = append(commands, newAnalyzeCmd) }

// analyzeOptions are the options of `failframe analyze`.
type analyzeOptions struct {
	io         *IOStreams
	cfg        analysis.Config
	loadOffset float64
	sync       string
	quiet      bool
}

func newAnalyzeCmd(io *IOStreams) *cobra.Command {
	return newAnalyzeCmdWith(io, analyzeRun)
}

func newAnalyzeCmdWith(io *IOStreams, runF func(*analyzeOptions) error) *cobra.Command {
	opts := &analyzeOptions{io: io}
	c := &opts.cfg
	cmd := &cobra.Command{
		Use:   "analyze CLIP --marks FILE --out DIR [flags]",
		Short: "Find how the tower failed and write a report folder",
		Long: `Analyze a slow-motion clip of a load test to failure: track the marked
points (decoding each frame once), measure twist, sway, member bow and
strain, find the first member to go and the order of events, line the
load-cell log up with the clip, and write a report folder.

The load log (--load) may be comma-, semicolon-, tab- or space-separated, with
or without a header, with comment lines starting with #, // or ;. Its time
column may be in s or ms (or a sample index with --load-rate) and its load
column in g, kg, N or lbf (from the header, or --load-unit). What was detected
is printed; the options override it.

The logger clock is lined up with video time (video = log + offset) by one of:
  automatic        the load's collapse drop is matched to the video's collapse
  --load-offset S  an offset you measured, in seconds
  --sync F@T       frame F of the clip happened at logger time T (seconds)

The report folder (--out) gets report.json, report.html (one self-contained
page), points.csv, levels.csv, members.csv, energy.csv, load.csv, plots/ and
evidence/. It is built beside DIR and swapped in at the end; an existing DIR
is only replaced with --force.

Safety: wear eye protection and keep clear of the hanging load when testing
to failure.` + exitHelp,
		Example: `  failframe analyze demo-out/clip/tower.avi --marks demo-out/clip/marks.yaml --load demo-out/clip/load.csv --mass-g 21.4 --out demo-out/report
  failframe analyze tower.mp4 --marks marks.yaml --load log.txt --load-unit N --sync 412@35.180 --out report --force`,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			c.Clip = args[0]
			if c.Marks == "" {
				return &FlagError{Err: errors.New("--marks is required: the marks file for the clip")}
			}
			if c.Out == "" {
				return &FlagError{Err: errors.New("--out is required: the report folder to write")}
			}
			fl := cmd.Flags()
			if c.Load == "" {
				for _, name := range []string{"load-unit", "load-time-unit", "load-rate", "load-offset", "sync"} {
					if fl.Changed(name) {
						return &FlagError{Err: fmt.Errorf("--%s needs --load", name)}
					}
				}
			}
			if fl.Changed("load-offset") && fl.Changed("sync") {
				return &FlagError{Err: errors.New("give either --load-offset or --sync, not both")}
			}
			if fl.Changed("load-offset") {
				if math.IsNaN(opts.loadOffset) || math.IsInf(opts.loadOffset, 0) {
					return &FlagError{Err: fmt.Errorf("--load-offset %g is not a number of seconds", opts.loadOffset)}
				}
				v := opts.loadOffset
				c.LoadOffsetS = &v
			}
			if fl.Changed("sync") {
				s, err := parseSync(opts.sync)
				if err != nil {
					return &FlagError{Err: err}
				}
				c.Sync = s
			}
			if c.LoadOptions.Unit != "" {
				u, ok := loadlog.NormalizeUnit(c.LoadOptions.Unit)
				if !ok {
					return &FlagError{Err: fmt.Errorf("--load-unit %q: want g, kg, N or lbf", c.LoadOptions.Unit)}
				}
				c.LoadOptions.Unit = u
			}
			if c.LoadOptions.TimeUnit != "" {
				u, ok := loadlog.NormalizeTimeUnit(c.LoadOptions.TimeUnit)
				if !ok {
					return &FlagError{Err: fmt.Errorf("--load-time-unit %q: want s, ms, us or index", c.LoadOptions.TimeUnit)}
				}
				c.LoadOptions.TimeUnit = u
			}
			if c.LoadOptions.RateHz < 0 || math.IsNaN(c.LoadOptions.RateHz) || math.IsInf(c.LoadOptions.RateHz, 0) {
				return &FlagError{Err: fmt.Errorf("--load-rate %g: want a rate above 0 in Hz", c.LoadOptions.RateHz)}
			}
			if c.MassG < 0 || math.IsNaN(c.MassG) || math.IsInf(c.MassG, 0) {
				return &FlagError{Err: fmt.Errorf("--mass-g %g: want the structure's mass in grams, above 0", c.MassG)}
			}
			// The syntax of --from and --to is checked now; the frame they
			// name needs the capture rate, known once the clip is open.
			for name, v := range map[string]string{"from": c.From, "to": c.To} {
				if v == "" {
					continue
				}
				if _, err := capture.ParsePosition(v, capture.Timebase{CaptureFPS: 1000}); err != nil {
					return &FlagError{Err: fmt.Errorf("--%s: %w", name, err)}
				}
			}
			if err := checkRateFlags(cmd, c.CaptureFPS, c.ImageFPS); err != nil {
				return err
			}
			return runF(opts)
		},
	}
	f := cmd.Flags()
	f.StringVar(&c.Marks, "marks", "", "marks file naming the tracked points and members (required)")
	f.StringVar(&c.Out, "out", "", "report folder to write (required)")
	f.StringVar(&c.Load, "load", "", "load-cell log (CSV or whitespace-separated)")
	f.StringVar(&c.LoadOptions.Unit, "load-unit", "", "unit of the log's load column: g, kg, N or lbf (default: from the header, else g)")
	f.StringVar(&c.LoadOptions.TimeUnit, "load-time-unit", "", "unit of the log's time column: s, ms, us or index (default: from the header or the values)")
	f.Float64Var(&c.LoadOptions.RateHz, "load-rate", 0, "sampling rate of the log in Hz, for a sample-index time column or a log without one")
	f.Float64Var(&opts.loadOffset, "load-offset", 0, "seconds to add to logger time to get video time (default: found automatically)")
	f.StringVar(&opts.sync, "sync", "", "FRAME@LOGTIME: a frame matched to a logger time in seconds, e.g. 412@35.18")
	f.Float64Var(&c.MassG, "mass-g", 0, "structure mass in grams, for the efficiency (load held / mass)")
	f.Float64Var(&c.CaptureFPS, "capture-fps", 0, "true capture rate of the clip (default: the marks file's, else the container's)")
	f.Float64Var(&c.ImageFPS, "image-fps", 0, "rate of a folder of stills, frames per second")
	f.StringVar(&c.From, "from", "", "first frame to analyse: a frame number or seconds like 1.25s")
	f.StringVar(&c.To, "to", "", "last frame to analyse: a frame number or seconds like 2.5s")
	f.BoolVar(&c.Force, "force", false, "replace an existing report folder")
	f.BoolVar(&opts.quiet, "quiet", false, "print no progress or status lines")
	return cmd
}

// parseSync reads FRAME@LOGTIME; the time may end in s or ms.
func parseSync(s string) (*analysis.SyncMark, error) {
	fr, t, ok := strings.Cut(strings.TrimSpace(s), "@")
	if !ok {
		return nil, fmt.Errorf("--sync %q: want FRAME@LOGTIME, e.g. 412@35.18", s)
	}
	frame, err := strconv.Atoi(strings.TrimSpace(fr))
	if err != nil || frame < 0 {
		return nil, fmt.Errorf("--sync %q: frame %q is not a frame number", s, fr)
	}
	t = strings.TrimSpace(t)
	scale := 1.0
	if v, ok := strings.CutSuffix(t, "ms"); ok {
		t, scale = v, 1e-3
	} else if v, ok := strings.CutSuffix(t, "s"); ok {
		t = v
	}
	sec, err := strconv.ParseFloat(strings.TrimSpace(t), 64)
	if err != nil || math.IsNaN(sec) || math.IsInf(sec, 0) {
		return nil, fmt.Errorf("--sync %q: logger time %q is not a number of seconds", s, t)
	}
	return &analysis.SyncMark{Frame: frame, LogTimeS: sec * scale}, nil
}

func analyzeRun(opts *analyzeOptions) error {
	cfg := opts.cfg
	if cfg.Tool == "" {
		cfg.Tool = "failframe " + Version
	}
	errOut := opts.io.ErrOut
	status := func(format string, a ...any) {
		if !opts.quiet {
			fmt.Fprintf(errOut, format+"\n", a...)
		}
	}
	update, finish := newProgress(opts.io, opts.quiet, 0, "tracking")
	prog := analysis.Progress{
		Stage: func(name string) {
			finish()
			status("%s...", name)
		},
		Frames: update,
		Warn: func(msg string) {
			finish()
			fmt.Fprintf(errOut, "warning: %s\n", msg)
		},
		Note: func(msg string) { status("%s", msg) },
	}
	res, err := analysis.Run(cfg, prog)
	finish()
	if err != nil {
		return err
	}
	printSummary(opts, res)
	return nil
}

// printSummary writes the result's headline to Out.
func printSummary(opts *analyzeOptions, r *report.Result) {
	out := opts.io.Out
	fmt.Fprintf(out, "%s\n", r.Account)
	first := r.FirstMember
	if first == "" {
		first = "undetermined"
	}
	fmt.Fprintf(out, "first member: %s\nfailure mode: %s\n", first, r.FailureMode)
	for _, e := range r.Events {
		load := ""
		if e.LoadG != nil {
			load = fmt.Sprintf("  %.0f g", *e.LoadG)
		}
		fmt.Fprintf(out, "  %-12s %-10s frame %6d  %8.4f s%s\n", e.Kind, e.Member, e.Frame, e.TimeS, load)
	}
	if r.Alignment != nil {
		fmt.Fprintf(out, "load offset: %.4f s ± %.4f s (%s)\n", r.Alignment.OffsetS, r.Alignment.UncertaintyS, r.Alignment.Method)
	}
	if r.PeakLoadG != nil {
		fmt.Fprintf(out, "peak load: %.0f g\n", *r.PeakLoadG)
	}
	if r.Efficiency != nil {
		fmt.Fprintf(out, "efficiency: %.0f (load held / mass)\n", *r.Efficiency)
	}
	fmt.Fprintf(out, "report: %s\n", opts.cfg.Out+"/"+report.HTMLFile)
}

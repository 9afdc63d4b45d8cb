package cli

import (
	"context"
	"errors"
	"fmt"
	"net"
	"os"
	"os/exec"
	"os/signal"
	"strconv"
	"syscall"

	"github.com/spf13/cobra"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/report/review"
)

func init() { commands = append(commands, newReviewCmd) }

// reviewOptions are the settings of `failframe review`.
type reviewOptions struct {
	IO *IOStreams

	Clip       string
	Marks      string
	Report     string
	CaptureFPS float64
	Port       int
	Listen     string
	Open       bool

	// portSet is true when --port was given.
	portSet bool
}

func newReviewCmd(io *IOStreams) *cobra.Command {
	return newReviewCmdWith(io, reviewRun)
}

func newReviewCmdWith(io *IOStreams, runF func(context.Context, *reviewOptions) error) *cobra.Command {
	opts := &reviewOptions{IO: io}
	cmd := &cobra.Command{
		Use:   "review CLIP [--marks FILE] [--report DIR]",
		Short: "Step through a clip in the browser and mark points by clicking",
		Long: `Review serves a page for one clip on this computer: step through the frames,
play them at a chosen slow-down, see the tracked points and the members
coloured by how far they bow, jump to the events of an analysis, follow the
aligned load, and place the marks (points, members, scale) by clicking.

The page is served on 127.0.0.1 only, at a free port unless --port is given;
the address is printed. --listen ADDR serves on another interface (anyone who
can reach it can then read the clip and change the marks file). Nothing is
opened by itself; --open asks the desktop (xdg-open) to open the page.

Without --marks the marks file is the clip's name with .marks.yaml; it need
not exist yet. With --report, the events, tracks and load of that analysis
are shown and "Save still" writes PNGs into its evidence folder.

Stop the server with Ctrl-C.
` + exitHelp,
		Example: `  failframe review tower.avi --marks marks.yaml
  failframe review tower.avi --marks marks.yaml --report report --open`,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.Clip = args[0]
			opts.portSet = cmd.Flags().Changed("port")
			if err := opts.check(); err != nil {
				return err
			}
			ctx := cmd.Context()
			if ctx == nil {
				ctx = context.Background()
			}
			return runF(ctx, opts)
		},
	}
	f := cmd.Flags()
	f.StringVar(&opts.Marks, "marks", "", "marks file to show and edit (default: CLIP with .marks.yaml)")
	f.StringVar(&opts.Report, "report", "", "report folder of an analysis of this clip")
	f.Float64Var(&opts.CaptureFPS, "capture-fps", 0, "true capture rate in frames per second (default: from the marks, the report, else the file)")
	f.IntVar(&opts.Port, "port", 0, "port to serve on (default: a free one)")
	f.StringVar(&opts.Listen, "listen", "", "address to serve on, HOST or HOST:PORT (default: 127.0.0.1)")
	f.BoolVar(&opts.Open, "open", false, "open the page with xdg-open")
	return cmd
}

// check validates the flags against each other.
func (o *reviewOptions) check() error {
	if o.Port < 0 || o.Port > 65535 {
		return &FlagError{Err: fmt.Errorf("--port %d is not a port (0-65535)", o.Port)}
	}
	if o.CaptureFPS != 0 { // 0: not given
		if err := capture.CheckRate(o.CaptureFPS); err != nil {
			return &FlagError{Err: fmt.Errorf("--capture-fps: %w", err)}
		}
	}
	if o.Listen != "" {
		if _, port, err := net.SplitHostPort(o.Listen); err == nil {
			if o.portSet {
				return &FlagError{Err: fmt.Errorf("--listen %s already names port %s; drop --port", o.Listen, port)}
			}
			if _, err := strconv.ParseUint(port, 10, 16); err != nil {
				return &FlagError{Err: fmt.Errorf("--listen %s: port %q is not a port", o.Listen, port)}
			}
		} else if net.ParseIP(o.Listen) == nil && o.Listen != "localhost" {
			return &FlagError{Err: fmt.Errorf("--listen %q is not HOST or HOST:PORT", o.Listen)}
		}
	}
	return nil
}

// addr returns the address to listen on.
func (o *reviewOptions) addr() string {
	if o.Listen == "" {
		return net.JoinHostPort("127.0.0.1", strconv.Itoa(o.Port))
	}
	if _, _, err := net.SplitHostPort(o.Listen); err == nil {
		return o.Listen
	}
	return net.JoinHostPort(o.Listen, strconv.Itoa(o.Port))
}

func reviewRun(ctx context.Context, o *reviewOptions) error {
	srv, err := review.New(review.Config{Clip: o.Clip, Marks: o.Marks, Report: o.Report, CaptureFPS: o.CaptureFPS})
	if err != nil {
		return asInput(err)
	}
	defer srv.Close()
	ln, err := review.Listen(o.addr())
	if err != nil {
		return err
	}
	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	defer stop()

	url := review.URL(ln)
	fmt.Fprintln(o.IO.Out, url)
	for _, w := range srv.Warnings() {
		fmt.Fprintf(o.IO.ErrOut, "warning: %s\n", w)
	}
	tb := srv.Timebase()
	fmt.Fprintf(o.IO.ErrOut, "reviewing %s at %g fps (%s); marks file %s\n", o.Clip, tb.CaptureFPS, tb.From, srv.MarksPath())
	if ip := ln.Addr().(*net.TCPAddr).IP; !ip.IsLoopback() {
		fmt.Fprintf(o.IO.ErrOut, "warning: serving on %s: anyone who can reach it can read the clip and change the marks file\n", ln.Addr())
	}
	fmt.Fprintln(o.IO.ErrOut, "press Ctrl-C to stop")
	if o.Open {
		if err := exec.Command("xdg-open", url).Start(); err != nil {
			fmt.Fprintf(o.IO.ErrOut, "warning: could not open the page (%v); open %s yourself\n", err, url)
		}
	}
	return srv.Serve(ctx, ln)
}

// asInput marks errors about the clip, marks or report as bad input.
func asInput(err error) error {
	var in *InputError
	if errors.As(err, &in) || exitCode(err) == ExitBadInput {
		return err
	}
	return &InputError{Err: err}
}

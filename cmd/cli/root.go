// Package cli holds failframe's commands. Commands are thin: they bind flags
// to an options struct, check them, and call into capture, tracking and
// report. Every command writes data to IOStreams.Out and status to ErrOut.
package cli

import (
	"fmt"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"github.com/failframe/failframe/capture"
)

// Version is failframe's version, printed by --version and written into
// every report.
const Version = "0.1.0"

// NewRootCmd builds the failframe command tree.
func NewRootCmd(io *IOStreams) *cobra.Command {
	root := &cobra.Command{
		Use:   "failframe",
		Short: "Find out how a model tower failed from a slow-motion clip and its load log",
		Long: `failframe reads a slow-motion clip of a model tower or bridge loaded to
failure, tracks the points you marked on its legs and braces, measures twist,
sway, bow and strain, finds the first member to go, lines the events up with
the load-cell log and writes a report you can attach to the build's record.

Safety: testing to failure throws splinters and drops weights. Wear eye
protection and keep hands and feet clear of the hanging load. Real structures
follow local codes and licensed engineers, not model tests.` + exitHelp,
		SilenceErrors: true,
		SilenceUsage:  true,
		Version:       Version,
	}
	root.SetOut(io.Out)
	root.SetErr(io.ErrOut)
	root.SetIn(io.In)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return &FlagError{Err: err}
	})
	for _, add := range commands {
		root.AddCommand(add(io))
	}
	spaceExitHelp(root)
	return root
}

// spaceExitHelp puts one blank line before the exit-status block of every
// command's long help, however the command's own text ends.
func spaceExitHelp(c *cobra.Command) {
	if i := strings.Index(c.Long, "Exit status:"); i > 0 {
		c.Long = strings.TrimRight(c.Long[:i], "\n") + "\n\n" + c.Long[i:]
	}
	for _, sub := range c.Commands() {
		spaceExitHelp(sub)
	}
}

// commands lists the constructors of the sub-commands; each file adds its own.
var commands []func(*IOStreams) *cobra.Command

// Main runs failframe with os.Args and returns the exit status. OpenCV's
// image functions run on the calling thread (see capture.SetImageThreads).
func Main(io *IOStreams) int {
	capture.SetImageThreads(1)
	return Run(io, os.Args[1:])
}

// Run runs failframe with the given arguments and returns the exit status.
func Run(io *IOStreams, args []string) int {
	root := NewRootCmd(io)
	root.SetArgs(args)
	cmd, err := root.ExecuteC()
	if err == nil {
		return ExitOK
	}
	fmt.Fprintf(io.ErrOut, "failframe: %v\n", err)
	code := exitCode(err)
	if strings.HasPrefix(err.Error(), "unknown command") {
		code = ExitUsage
	}
	if code == ExitUsage && cmd != nil {
		fmt.Fprintf(io.ErrOut, "\n%s", cmd.UsageString())
	}
	return code
}

// exactArgs is cobra.ExactArgs with the error marked as a command-line mistake.
func exactArgs(n int) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		if err := cobra.ExactArgs(n)(cmd, args); err != nil {
			return &FlagError{Err: err}
		}
		return nil
	}
}

// rangeArgs is cobra.RangeArgs with the error marked as a command-line mistake.
func rangeArgs(min, max int) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		if err := cobra.RangeArgs(min, max)(cmd, args); err != nil {
			return &FlagError{Err: err}
		}
		return nil
	}
}

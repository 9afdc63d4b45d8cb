package cli

import (
	"testing"

	"github.com/spf13/cobra"
)

// parseArgs builds a command with its run function replaced, runs it on args
// and returns the options the flags produced (nil when parsing failed).
func parseArgs[T any](t *testing.T, newCmdWith func(*IOStreams, func(*T) error) *cobra.Command, args []string) (*T, error) {
	t.Helper()
	io, _, _ := testIO()
	var got *T
	cmd := newCmdWith(io, func(o *T) error { got = o; return nil })
	cmd.SetArgs(args)
	cmd.SetOut(io.Out)
	cmd.SetErr(io.ErrOut)
	err := cmd.Execute()
	return got, err
}

package cli

import (
	"errors"
	"strings"
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

// checkArgs parses args with newCmdWith and checks the outcome: a *FlagError
// containing wantErr when wantErr is set, else options equal to want once
// clear has removed the fields a test cannot compare (such as the streams).
func checkArgs[T comparable](t *testing.T, newCmdWith func(*IOStreams, func(*T) error) *cobra.Command, args []string, wantErr string, want T, clear func(*T)) {
	t.Helper()
	got, err := parseArgs(t, newCmdWith, args)
	if wantErr != "" {
		var fe *FlagError
		if !errors.As(err, &fe) || !strings.Contains(err.Error(), wantErr) {
			t.Fatalf("error %v, want a FlagError with %q", err, wantErr)
		}
		return
	}
	if err != nil {
		t.Fatal(err)
	}
	clear(got)
	if *got != want {
		t.Errorf("options %+v, want %+v", *got, want)
	}
}

package cli

import (
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"strings"
	"testing"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/report/analysis"
	"github.com/failframe/failframe/report/loadlog"
	"github.com/failframe/failframe/tracking/marks"
)

// testIO returns IOStreams over buffers, as a test sees a non-terminal.
func testIO() (*IOStreams, *bytes.Buffer, *bytes.Buffer) {
	out, errOut := &bytes.Buffer{}, &bytes.Buffer{}
	return &IOStreams{In: strings.NewReader(""), Out: out, ErrOut: errOut}, out, errOut
}

func TestRootHelpAndUsageErrors(t *testing.T) {
	tests := []struct {
		name    string
		args    []string
		code    int
		wantOut string
		wantErr string
	}{
		{"help lists safety and exit statuses", []string{"--help"}, ExitOK, "Exit status:", ""},
		{"version", []string{"--version"}, ExitOK, "failframe version " + Version, ""},
		{"unknown command", []string{"no-such-command"}, ExitUsage, "", "unknown command"},
		{"unknown flag", []string{"--no-such-flag"}, ExitUsage, "", "unknown flag"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, out, errOut := testIO()
			if got := Run(io, tt.args); got != tt.code {
				t.Fatalf("exit %d, want %d; stderr: %s", got, tt.code, errOut)
			}
			if !strings.Contains(out.String(), tt.wantOut) {
				t.Errorf("stdout %q lacks %q", out, tt.wantOut)
			}
			if !strings.Contains(errOut.String(), tt.wantErr) {
				t.Errorf("stderr %q lacks %q", errOut, tt.wantErr)
			}
		})
	}
}

func TestExitCodeMap(t *testing.T) {
	tests := []struct {
		err  error
		want int
	}{
		{nil, ExitOK},
		{&FlagError{Err: errors.New("bad flag")}, ExitUsage},
		{fmt.Errorf("wrapped: %w", &InputError{Err: errors.New("bad log")}), ExitBadInput},
		{fmt.Errorf("read: %w", &capture.FrameError{Path: "c.mp4", Frame: 3, Err: errors.New("corrupt")}), ExitBadInput},
		{&marks.Error{Path: "m.yaml", Line: 4, Err: errors.New("duplicate id")}, ExitBadInput},
		{fmt.Errorf("open: %w", fs.ErrNotExist), ExitBadInput},
		{fmt.Errorf("analyze: %w", &loadlog.ParseError{Path: "load.csv", Line: 7, Err: errors.New("time went backwards")}), ExitBadInput},
		{&analysis.InputError{Err: errors.New("no report folder given")}, ExitBadInput},
		{errCancelled, ExitCancelled},
		{errors.New("something unexpected"), ExitFailure},
	}
	for _, tt := range tests {
		if got := exitCode(tt.err); got != tt.want {
			t.Errorf("exitCode(%v) = %d, want %d", tt.err, got, tt.want)
		}
	}
}

package cli

import (
	"strings"
	"testing"
	"time"
)

func TestProgress(t *testing.T) {
	defer func(d time.Duration) { progressDelay = d }(progressDelay)
	tests := []struct {
		name     string
		terminal bool
		quiet    bool
		delay    time.Duration
		want     bool
	}{
		{"terminal, long read", true, false, 0, true},
		{"not a terminal", false, false, 0, false},
		{"quiet", true, true, 0, false},
		{"short read", true, false, time.Hour, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			progressDelay = tt.delay
			io, out, errOut := testIO()
			io.ErrIsTerminal = tt.terminal
			update, finish := newProgress(io, tt.quiet, 100, "reading frames")
			for i := 0; i <= 100; i += 10 {
				update(i, 100)
			}
			finish()
			finish()
			update(100, 100) // after finish: ignored
			if got := strings.Contains(errOut.String(), "reading frames"); got != tt.want {
				t.Errorf("bar shown %v, want %v: %q", got, tt.want, errOut)
			}
			if out.Len() != 0 {
				t.Errorf("progress wrote to Out: %q", out)
			}
		})
	}
}

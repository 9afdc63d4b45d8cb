package cli

import (
	"io"
	"os"

	"golang.org/x/term"
)

// IOStreams are the command's standard streams, injected so that commands can
// be tested with buffers. Data goes to Out; progress, warnings and status
// lines go to ErrOut.
type IOStreams struct {
	// In is standard input.
	In io.Reader
	// Out receives data and results.
	Out io.Writer
	// ErrOut receives progress, warnings and errors.
	ErrOut io.Writer
	// ErrIsTerminal is true when ErrOut is a terminal; progress bars show only then.
	ErrIsTerminal bool
	// InIsTerminal is true when In is a terminal; questions are asked only then.
	InIsTerminal bool
}

// System returns the process's own streams.
func System() *IOStreams {
	return &IOStreams{
		In:            os.Stdin,
		Out:           os.Stdout,
		ErrOut:        os.Stderr,
		ErrIsTerminal: term.IsTerminal(int(os.Stderr.Fd())),
		InIsTerminal:  term.IsTerminal(int(os.Stdin.Fd())),
	}
}

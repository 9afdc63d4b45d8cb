package cli

import (
	"errors"
	"io/fs"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/report/analysis"
	"github.com/failframe/failframe/report/loadlog"
	"github.com/failframe/failframe/report/records"
	"github.com/failframe/failframe/tracking/marks"
)

// Exit statuses, the same for every command.
const (
	// ExitOK means the command did what was asked.
	ExitOK = 0
	// ExitFailure means an unexpected failure (a bug or the system).
	ExitFailure = 1
	// ExitUsage means the command line was wrong: unknown flag, bad value, missing argument.
	ExitUsage = 2
	// ExitBadInput means an input file (clip, marks, load log, report, record) could not be used.
	ExitBadInput = 3
	// ExitCancelled means the user declined a question.
	ExitCancelled = 4
)

const exitHelp = `
Exit status:
  0  done
  1  unexpected failure
  2  wrong command line (flag, value or argument)
  3  an input could not be used (clip, marks, load log, report or record)
  4  cancelled at a question`

// FlagError is a command-line mistake; it prints the usage and exits 2.
type FlagError struct{ Err error }

func (e *FlagError) Error() string { return e.Err.Error() }

// Unwrap returns the underlying problem.
func (e *FlagError) Unwrap() error { return e.Err }

// InputError marks an error as caused by bad input (exit 3).
type InputError struct{ Err error }

func (e *InputError) Error() string { return e.Err.Error() }

// Unwrap returns the underlying problem.
func (e *InputError) Unwrap() error { return e.Err }

// errCancelled is returned when the user declines a question.
var errCancelled = errors.New("cancelled")

// exitCode is the one map from errors to exit statuses.
func exitCode(err error) int {
	var (
		flagErr  *FlagError
		inErr    *InputError
		frameErr *capture.FrameError
		clipErr  *capture.ClipError
		marksErr *marks.Error
		recErr   *records.Error
		integErr *records.IntegrityError
		anErr    *analysis.InputError
		logErr   *loadlog.ParseError
	)
	switch {
	case err == nil:
		return ExitOK
	case errors.As(err, &flagErr):
		return ExitUsage
	case errors.Is(err, errCancelled):
		return ExitCancelled
	case errors.As(err, &inErr), errors.As(err, &frameErr), errors.As(err, &clipErr), errors.As(err, &marksErr),
		errors.As(err, &recErr), errors.As(err, &integErr), errors.As(err, &anErr), errors.As(err, &logErr),
		errors.Is(err, fs.ErrNotExist), errors.Is(err, fs.ErrPermission):
		return ExitBadInput
	}
	return ExitFailure
}

package cli

import (
	"sync"
	"time"

	"github.com/schollz/progressbar/v3"
)

// progressDelay is how long work runs before a progress bar appears, so
// that quick reads print nothing.
var progressDelay = 2 * time.Second

// newProgress returns update, which reports work done (done of total items,
// for example frames), and finish, which ends the report. A bar labelled
// what is drawn on io.ErrOut only when ErrOut is a terminal, quiet is false
// and the work has run longer than progressDelay; otherwise both functions
// do nothing. A total of 0 or less means unknown (a spinner is shown);
// update's own total, when positive, replaces it. Both are safe to call from
// several goroutines; finish may be called more than once.
func newProgress(io *IOStreams, quiet bool, total int, what string) (update func(done, total int), finish func()) {
	if quiet || !io.ErrIsTerminal {
		return func(int, int) {}, func() {}
	}
	var (
		mu    sync.Mutex
		bar   *progressbar.ProgressBar
		start = time.Now()
		max   = total
		ended bool
	)
	update = func(done, n int) {
		mu.Lock()
		defer mu.Unlock()
		if ended {
			return
		}
		if n > 0 {
			max = n
		}
		if bar == nil {
			if time.Since(start) < progressDelay {
				return
			}
			limit := max
			if limit <= 0 {
				limit = -1 // unknown length: spinner
			}
			bar = progressbar.NewOptions(limit,
				progressbar.OptionSetWriter(io.ErrOut),
				progressbar.OptionSetDescription(what),
				progressbar.OptionShowCount(),
				progressbar.OptionSetPredictTime(true),
				progressbar.OptionThrottle(100*time.Millisecond),
				progressbar.OptionClearOnFinish(),
			)
		}
		if max > 0 && bar.GetMax() != max {
			bar.ChangeMax(max)
		}
		_ = bar.Set(done)
	}
	finish = func() {
		mu.Lock()
		defer mu.Unlock()
		if bar != nil && !ended {
			_ = bar.Finish()
		}
		ended = true
	}
	return update, finish
}

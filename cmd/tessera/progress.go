package main

import (
	"io"
	"os"
	"time"

	"github.com/schollz/progressbar/v3"
)

// progressDelay is how long a fit runs before a progress bar appears: work
// that takes less needs none.
const progressDelay = 2 * time.Second

// newProgress returns a callback for fit.Options.Progress that draws a
// progress bar on stderr once the work has taken progressDelay, only when
// stderr is a terminal and not quiet; otherwise it returns nil.
func newProgress(stderr io.Writer, quiet bool, what string) func(done, total int) {
	f, ok := stderr.(*os.File)
	if quiet || !ok {
		return nil
	}
	if st, err := f.Stat(); err != nil || st.Mode()&os.ModeCharDevice == 0 {
		return nil
	}
	start := time.Now()
	var bar *progressbar.ProgressBar
	return func(done, total int) {
		if bar == nil {
			if time.Since(start) < progressDelay || done == total {
				return
			}
			bar = progressbar.NewOptions(total,
				progressbar.OptionSetWriter(f),
				progressbar.OptionSetDescription(what),
				progressbar.OptionShowCount(),
				progressbar.OptionSetPredictTime(true),
				progressbar.OptionClearOnFinish(),
				progressbar.OptionThrottle(100*time.Millisecond))
		}
		bar.Set(done)
		if done == total {
			bar.Finish()
		}
	}
}

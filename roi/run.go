package roi

import (
	"fmt"
	"math"
	"strconv"
)

// Run is everything read for one run: its row of the study table and its
// tables. Events and Confounds are nil when the run has none. Warnings holds
// every warning about the run (those of its events table included), each
// one sentence that names its file and lines.
type Run struct {
	Spec      RunSpec
	Signals   *Numeric
	Events    *Events
	Confounds *Numeric
	Warnings  []string
}

// LoadOptions controls how LoadRun treats bad signal values.
type LoadOptions struct {
	// MissingCensor reads missing and non-finite signal values as NaN, for
	// the caller to censor those volumes, instead of refusing them.
	MissingCensor bool
}

// LoadRun reads and checks the tables of one run.
//
// Signals may hold no missing or non-finite value unless opt.MissingCensor.
// Confounds may hold missing cells (read as NaN: confound files often have
// n/a in the first row of derivative columns; the design refuses NaN only in
// the columns it uses) but no infinite value, and must have one row per
// volume of the signals. Events whose onset is at or after the end of the
// run (volumes × TR) are dropped with a warning; if every event is dropped
// that way the run is refused, since the onsets are then most likely in
// volumes or milliseconds.
//
// A file that cannot be read is reported against the study-table row and
// column that named it (File is the study table, Line the row, Field the
// column), or against the path itself for a run given without a study table.
func LoadRun(spec RunSpec, opt LoadOptions) (*Run, error) {
	if found, expected := checkTR(strconv.FormatFloat(spec.TR, 'g', -1, 64), spec.TR); found != "" {
		return nil, spec.fieldError("tr", found, expected)
	}
	if spec.Signals == "" {
		return nil, spec.fieldError("signals", "no signals table", "the path of the run's signals table")
	}
	for _, f := range []struct{ field, path string }{
		{"signals", spec.Signals}, {"events", spec.Events}, {"confounds", spec.Confounds},
	} {
		if f.path == "" {
			continue
		}
		if err := checkReadable(f.path); err != nil {
			return nil, spec.fileError(f.field, f.path, err)
		}
	}
	run := &Run{Spec: spec}
	sigOpt := NumericOptions{MissingHint: "to censor volumes with missing or non-finite values instead, use --missing censor"}
	if opt.MissingCensor {
		sigOpt = NumericOptions{AllowMissing: true, NonFiniteAsMissing: true}
	}
	var err error
	if run.Signals, err = ReadNumeric(spec.Signals, sigOpt); err != nil {
		return nil, err
	}
	volumes := run.Signals.Rows()
	if spec.Confounds != "" {
		if run.Confounds, err = ReadNumeric(spec.Confounds, NumericOptions{AllowMissing: true}); err != nil {
			return nil, err
		}
		if n := run.Confounds.Rows(); n != volumes {
			return nil, &InputError{File: spec.Confounds,
				Found:    fmt.Sprintf("%d %s, while the signals table %s has %d", n, plural(n, "row", "rows"), spec.Signals, volumes),
				Expected: "one row per volume of the signals table"}
		}
	}
	if spec.Events != "" {
		if run.Events, err = ReadEvents(spec.Events); err != nil {
			return nil, err
		}
		run.Warnings = append(run.Warnings, run.Events.Warnings...)
		if err := dropLateEvents(run, volumes); err != nil {
			return nil, err
		}
	}
	return run, nil
}

// dropLateEvents removes the events that start at or after the end of the
// run, with a warning, and refuses a run whose events all start there.
func dropLateEvents(run *Run, volumes int) error {
	ev, tr := run.Events, run.Spec.TR
	end := float64(volumes) * tr
	kept := ev.Events[:0:0]
	var late []int
	first, last := math.Inf(1), math.Inf(-1)
	for _, e := range ev.Events {
		first, last = math.Min(first, e.Onset), math.Max(last, e.Onset)
		if e.Onset >= end {
			late = append(late, e.Line)
			continue
		}
		kept = append(kept, e)
	}
	if len(late) == 0 {
		return nil
	}
	runEnd := fmt.Sprintf("%g s (%d volumes of %g s)", end, volumes, tr)
	if len(kept) == 0 {
		return &InputError{File: ev.Path,
			Found: fmt.Sprintf("every onset (%d %s, from %g to %g) is at or after the end of the run at %s",
				len(late), plural(len(late), "event", "events"), first, last, runEnd),
			Expected: "onsets in seconds from the start of the first volume: onsets may be in volumes or " +
				"milliseconds, and Tessera needs seconds"}
	}
	ev.Events = kept
	run.Warnings = append(run.Warnings, fmt.Sprintf("%s: %s %s an onset at or after the end of the run at %s and %s dropped",
		ev.Path, formatLines(late), plural(len(late), "has", "have"), runEnd, plural(len(late), "was", "were")))
	return nil
}

// fieldError reports a bad value of a run's field: against the study-table
// row when there is one, else against the field itself.
func (r RunSpec) fieldError(field, found, expected string) *InputError {
	if r.Study != "" {
		return &InputError{File: r.Study, Line: r.Line, Field: field, Found: found, Expected: expected}
	}
	return &InputError{File: field, Found: found, Expected: expected}
}

// fileError reports a file of a run that cannot be read.
func (r RunSpec) fileError(field, path string, err error) *InputError {
	if r.Study != "" {
		return &InputError{File: r.Study, Line: r.Line, Field: field,
			Found:    fmt.Sprintf("%s table %q cannot be used: %v", field, path, err),
			Expected: "the path of a readable file, relative to the study table's folder"}
	}
	return &InputError{File: path, Found: err.Error(), Expected: "the path of a readable " + field + " table"}
}

// SingleRun builds the RunSpec of a run given without a study table (the
// single-run form of the fit command). Such a run is labelled subject "sub",
// run "1", with no session, and has Line 0 and no Study; its paths are used
// as given. events and confounds may be empty. tr is in seconds: more than 0
// and at most 20 (a larger value looks like milliseconds and is refused).
func SingleRun(signals, events, confounds string, tr float64) (RunSpec, error) {
	spec := RunSpec{Subject: "sub", Run: "1", TR: tr, Signals: signals, Events: events, Confounds: confounds}
	if signals == "" {
		return RunSpec{}, spec.fieldError("signals", "no signals table", "the path of the run's signals table")
	}
	if found, expected := checkTR(strconv.FormatFloat(tr, 'g', -1, 64), tr); found != "" {
		return RunSpec{}, spec.fieldError("tr", found, expected)
	}
	return spec, nil
}

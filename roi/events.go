package roi

import (
	"fmt"
	"io"
	"strings"
)

// ReadEvents reads an events table from path. See ParseEvents for the rules.
func ReadEvents(path string) (*Events, error) {
	text, err := openText(path)
	if err != nil {
		return nil, err
	}
	return parseEvents(path, text)
}

// ParseEvents reads an events table from r; name is used in messages and
// stored as Path.
//
// Columns are found by name in any order, ignoring case: onset and duration
// (seconds), condition or trial_type (as in BIDS event files; when both are
// present condition is used and trial_type is kept as an extra column), and
// an optional amplitude. Every other column is kept as text in Event.Extra,
// by its header name.
//
// A row whose condition is missing (empty, NA, n/a, NaN) is skipped, and
// Warnings says which lines were skipped; its other cells are not checked.
// In the remaining rows onset must be a finite number, duration a finite
// number of 0 or more, and amplitude, where the column exists, a finite
// number in every row: a missing amplitude is an error, not a default,
// because a height silently set to 1 changes the estimates. Without an
// amplitude column every event has amplitude 1. A table with a header and no
// rows has no events and one warning.
func ParseEvents(name string, r io.Reader) (*Events, error) {
	text, err := readText(name, r)
	if err != nil {
		return nil, err
	}
	return parseEvents(name, text)
}

func parseEvents(name, text string) (*Events, error) {
	t, err := parseTable(name, text, "a header line naming the columns onset, duration and condition (or trial_type)")
	if err != nil {
		return nil, err
	}
	// A name written exactly is preferred, since BIDS files may hold
	// columns that differ only in case (ds002 has feedback and Feedback).
	find := func(col string) int {
		if j := t.Col(col); j >= 0 {
			return j
		}
		for j, h := range t.Names {
			if strings.EqualFold(h, col) {
				return j
			}
		}
		return -1
	}
	onset, duration, amplitude := find("onset"), find("duration"), find("amplitude")
	cond := find("condition")
	if cond < 0 {
		cond = find("trial_type")
	}
	var absent []string
	if onset < 0 {
		absent = append(absent, `"onset"`)
	}
	if duration < 0 {
		absent = append(absent, `"duration"`)
	}
	if cond < 0 {
		absent = append(absent, `"condition" (or "trial_type")`)
	}
	if len(absent) > 0 {
		return nil, &InputError{File: name, Line: t.HeaderLine,
			Found:    fmt.Sprintf("%s; the header has %s", noColumns(absent), quoteList(t.Names)),
			Expected: "columns onset and duration (in seconds) and condition or trial_type, in any order"}
	}
	ev := &Events{Path: name, Columns: t.Names}
	var extra []int
	for j := range t.Names {
		if j != onset && j != duration && j != cond && j != amplitude {
			extra = append(extra, j)
		}
	}
	var skipped []int
	skippedAs := map[string]bool{}
	for i, row := range t.Rows {
		line := t.Lines[i]
		if isMissing(row[cond]) {
			skipped = append(skipped, line)
			skippedAs[row[cond]] = true
			continue
		}
		e := Event{Condition: row[cond], Line: line, Amplitude: 1}
		e.Onset, err = eventNumber(t, i, onset, "the onset in seconds: every event needs one")
		if err != nil {
			return nil, err
		}
		e.Duration, err = eventNumber(t, i, duration, "the duration in seconds (0 for a brief event): every event needs one")
		if err != nil {
			return nil, err
		}
		if e.Duration < 0 {
			return nil, &InputError{File: name, Line: line, Column: duration + 1, Field: t.Names[duration],
				Found:    fmt.Sprintf("%q is a negative duration", row[duration]),
				Expected: "a duration in seconds of 0 or more"}
		}
		if amplitude >= 0 {
			e.Amplitude, err = eventNumber(t, i, amplitude,
				"a number: give every event an amplitude, or leave the amplitude column out for a height of 1")
			if err != nil {
				return nil, err
			}
		}
		if len(extra) > 0 {
			e.Extra = make(map[string]string, len(extra))
			for _, j := range extra {
				e.Extra[t.Names[j]] = row[j]
			}
		}
		ev.Events = append(ev.Events, e)
	}
	if len(skipped) > 0 {
		what := "no condition (empty or a missing-value token)"
		if len(skippedAs) == 1 {
			for tok := range skippedAs {
				if tok == "" {
					what = "an empty condition"
				} else {
					what = "condition " + tok
				}
			}
		}
		ev.Warnings = append(ev.Warnings, fmt.Sprintf("%s: %s %s %s and %s skipped", name, formatLines(skipped),
			plural(len(skipped), "has", "have"), what, plural(len(skipped), "was", "were")))
	}
	if len(t.Rows) == 0 {
		ev.Warnings = append(ev.Warnings, name+": the table has a header and no events")
	}
	return ev, nil
}

// eventNumber reads the number in row i, column j of an events table.
func eventNumber(t *Table, i, j int, missing string) (float64, error) {
	cell := t.Rows[i][j]
	v, st := parseCell(cell)
	if st != cellNumber {
		return 0, cellError(t.Path, t.Lines[i], j+1, t.Names[j], cell, st, missing)
	}
	return v, nil
}

// quoteList writes names as "a", "b", "c".
func quoteList(names []string) string {
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = fmt.Sprintf("%q", n)
	}
	return strings.Join(q, ", ")
}

// noColumns says which (already quoted) columns are absent.
func noColumns(absent []string) string {
	if len(absent) == 1 {
		return "no column " + absent[0]
	}
	return "no columns " + strings.Join(absent[:len(absent)-1], ", ") + " and " + absent[len(absent)-1]
}

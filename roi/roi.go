// Package roi reads and validates what comes into Tessera: the study table,
// the per-run signals, events and confounds tables, into typed values.
//
// roi knows file formats and nothing about statistics. Every problem with a
// file is returned as an *InputError that names the file, the line and the
// column or field, what was found and what was expected, so a person can fix
// the file without reading code.
//
// Format rules shared by every reader (see the README's "Input formats"):
//   - the delimiter (comma, tab or semicolon) is detected from the header line;
//   - files ending in .gz are read compressed;
//   - a byte-order mark and CRLF line ends are accepted;
//   - missing cells are empty, NA, n/a or NaN;
//   - decimal point only: a table whose cells look like decimal-comma numbers
//     is refused with a message that says so.
package roi

import (
	"fmt"
	"strings"
)

// InputError is a problem with an input file, located as precisely as the
// reader can: Line and Column count from 1 (0 means unknown or not
// applicable); Field is the column's header name where there is one.
type InputError struct {
	File     string
	Line     int
	Column   int
	Field    string
	Found    string // what was found, already quoted where it is file text
	Expected string // what was expected
}

func (e *InputError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
		if e.Column > 0 {
			fmt.Fprintf(&b, ":%d", e.Column)
		}
	}
	b.WriteString(": ")
	b.WriteString(e.Found)
	if e.Field != "" {
		fmt.Fprintf(&b, " (column %q)", e.Field)
	}
	if e.Expected != "" {
		b.WriteString("; expected ")
		b.WriteString(e.Expected)
	}
	return b.String()
}

// Study is the study table: one RunSpec per row, in file order.
type Study struct {
	Path string    // the study table as given
	Dir  string    // folder that relative paths are resolved against
	Runs []RunSpec // in file order
}

// RunSpec is one row of the study table, with paths resolved against the
// study table's folder. Events and Confounds are empty when not given.
type RunSpec struct {
	Subject   string
	Session   string // empty where the study has no sessions
	Run       string
	TR        float64 // seconds
	Signals   string
	Events    string
	Confounds string
	Line      int    // line of this row in the study table; 0 without one
	Study     string // the study table this row came from; empty without one
}

// Key identifies a run in messages and file names: subject[_session]_run.
func (r RunSpec) Key() string {
	if r.Session == "" {
		return r.Subject + "_" + r.Run
	}
	return r.Subject + "_" + r.Session + "_" + r.Run
}

// Numeric is a wide numeric table (signals or confounds): one column per
// header name, one row per volume. Missing cells are NaN; readers that do
// not allow them refuse the table instead.
type Numeric struct {
	Path  string
	Names []string    // header, in file order
	Cols  [][]float64 // Cols[j][t]: column j, volume t
}

// Rows is the number of volumes.
func (n *Numeric) Rows() int {
	if len(n.Cols) == 0 {
		return 0
	}
	return len(n.Cols[0])
}

// Column returns the column with the given header name, or nil.
func (n *Numeric) Column(name string) []float64 {
	for j, h := range n.Names {
		if h == name {
			return n.Cols[j]
		}
	}
	return nil
}

// Event is one row of an events table.
type Event struct {
	Onset     float64 // seconds from the start of the first volume
	Duration  float64 // seconds, >= 0
	Amplitude float64 // height of the boxcar; 1 when the table has none
	Condition string
	Line      int               // line in the events file
	Extra     map[string]string // every other column, by header name, as text
}

// Events is an events table. Warnings lists rows that were skipped (for
// example a condition of n/a) in words that name their lines.
type Events struct {
	Path     string
	Events   []Event // in file order, skipped rows removed
	Columns  []string
	Warnings []string
}

// Conditions returns the distinct condition names in order of first
// appearance.
func (e *Events) Conditions() []string {
	var out []string
	seen := map[string]bool{}
	for _, ev := range e.Events {
		if !seen[ev.Condition] {
			seen[ev.Condition] = true
			out = append(out, ev.Condition)
		}
	}
	return out
}

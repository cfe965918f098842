package roi

import (
	"fmt"
	"io"
	"math"
	"path/filepath"
	"slices"
	"strings"

	"github.com/gocarina/gocsv"
)

// maxTR is the longest repetition time accepted, in seconds. Real
// acquisitions are well below it; a larger value is almost always a TR
// written in milliseconds.
const maxTR = 20

// MinTR is the shortest repetition time accepted, in seconds: no volume is
// acquired faster (the fastest multiband sequences take about 0.1 s), and
// the response is sampled on a grid finer than the TR, whose size a TR near
// 0 would make unbounded.
const MinTR = 0.01

// studyRow is one row of the study table as gocsv fills it. Every field is
// text so that each value is checked here, with its line and column.
type studyRow struct {
	Subject   string `csv:"subject"`
	Session   string `csv:"session"`
	Run       string `csv:"run"`
	TR        string `csv:"tr"`
	Signals   string `csv:"signals"`
	Events    string `csv:"events"`
	Confounds string `csv:"confounds"`
}

var (
	studyRequired = []string{"subject", "run", "tr", "signals"}
	studyColumns  = []string{"subject", "session", "run", "tr", "signals", "events", "confounds"}
)

// ReadStudy reads the study table at path: one row per run, with columns
// subject, run, tr (seconds) and signals, and optionally session, events and
// confounds; other columns are ignored. Header names are matched ignoring
// case and surrounding spaces. Paths are resolved against the folder of the
// study table unless absolute. A missing-value token (empty, NA, n/a, NaN) in
// session, events or confounds means none; subject, run, tr and signals are
// required in every row. Labels may not contain / or \, since they name
// output files. A repeated (subject, session, run) is an error.
func ReadStudy(path string) (*Study, error) {
	text, err := openText(path)
	if err != nil {
		return nil, err
	}
	return parseStudy(path, text)
}

// ParseStudy reads a study table from r, as ReadStudy does; name is the
// table's path, used in messages and to resolve relative paths.
func ParseStudy(name string, r io.Reader) (*Study, error) {
	text, err := readText(name, r)
	if err != nil {
		return nil, err
	}
	return parseStudy(name, text)
}

func parseStudy(name, text string) (*Study, error) {
	t, err := parseTable(name, text, "a header line with the columns subject, run, tr and signals, then one row per run")
	if err != nil {
		return nil, err
	}
	// gocsv matches header names exactly: hand it the known columns in lower
	// case, and refuse one named twice in different cases.
	header := make([]string, len(t.Names))
	cols := map[string]int{}
	for j, n := range t.Names {
		header[j] = n
		low := strings.ToLower(n)
		if !slices.Contains(studyColumns, low) {
			continue
		}
		if k, dup := cols[low]; dup {
			return nil, &InputError{File: name, Line: t.HeaderLine, Column: j + 1,
				Found:    fmt.Sprintf("column %d is named %q and column %d %q", j+1, n, k+1, t.Names[k]),
				Expected: "each of " + strings.Join(studyColumns, ", ") + " at most once (names are read ignoring case)"}
		}
		cols[low] = j
		header[j] = low
	}
	var absent []string
	for _, c := range studyRequired {
		if _, ok := cols[c]; !ok {
			absent = append(absent, fmt.Sprintf("%q", c))
		}
	}
	if len(absent) > 0 {
		return nil, &InputError{File: name, Line: t.HeaderLine,
			Found:    fmt.Sprintf("%s; the header has %s", noColumns(absent), quoteList(t.Names)),
			Expected: "columns subject, run, tr and signals, and optionally session, events and confounds"}
	}
	if len(t.Rows) == 0 {
		return nil, &InputError{File: name, Line: t.HeaderLine, Found: "a header and no runs",
			Expected: "one row per run after the header"}
	}
	var rows []studyRow
	src := &replayReader{rows: append([][]string{header}, t.Rows...)}
	if err := gocsv.UnmarshalCSV(src, &rows); err != nil {
		return nil, &InputError{File: name, Found: "the table could not be read (" + err.Error() + ")",
			Expected: "a study table with one row per run"}
	}
	if len(rows) != len(t.Rows) {
		return nil, &InputError{File: name, Found: fmt.Sprintf("%d rows were read of %d", len(rows), len(t.Rows)),
			Expected: "every row of the study table"}
	}
	st := &Study{Path: name, Dir: filepath.Dir(name)}
	type runKey struct{ subject, session, run string }
	first := map[runKey]int{}
	byName := map[string]int{} // RunSpec.Key() → line
	for i, row := range rows {
		line := t.Lines[i]
		cellErr := func(col, found, expected string) *InputError {
			return &InputError{File: name, Line: line, Column: cols[col] + 1, Field: t.Names[cols[col]],
				Found: found, Expected: expected}
		}
		spec := RunSpec{Study: name, Line: line}
		for _, f := range []struct {
			col string
			val string
			dst *string
		}{{"subject", row.Subject, &spec.Subject}, {"run", row.Run, &spec.Run}, {"session", row.Session, &spec.Session}} {
			if isMissing(f.val) {
				if f.col == "session" {
					continue
				}
				return nil, cellErr(f.col, describeMissing(f.val), "a "+f.col+" label in every row")
			}
			if strings.ContainsAny(f.val, `/\`) {
				return nil, cellErr(f.col, fmt.Sprintf("%q contains / or \\", f.val),
					"a label without / or \\ (labels name output files)")
			}
			*f.dst = f.val
		}
		tr, st2 := parseCell(row.TR)
		switch {
		case st2 == cellMissing:
			return nil, cellErr("tr", describeMissing(row.TR), "the repetition time in seconds in every row")
		case st2 != cellNumber:
			return nil, cellError(name, line, cols["tr"]+1, t.Names[cols["tr"]], row.TR, st2, "")
		}
		if found, expected := checkTR(row.TR, tr); found != "" {
			return nil, cellErr("tr", found, expected)
		}
		spec.TR = tr
		if isMissing(row.Signals) {
			return nil, cellErr("signals", describeMissing(row.Signals),
				"the path of the run's signals table, relative to the study table's folder")
		}
		spec.Signals = resolve(st.Dir, row.Signals)
		if !isMissing(row.Events) {
			spec.Events = resolve(st.Dir, row.Events)
		}
		if !isMissing(row.Confounds) {
			spec.Confounds = resolve(st.Dir, row.Confounds)
		}
		k := runKey{spec.Subject, spec.Session, spec.Run}
		if l, dup := first[k]; dup {
			return nil, &InputError{File: name, Line: line,
				Found: fmt.Sprintf("subject %q, session %q, run %q again: line %d has the same run",
					spec.Subject, spec.Session, spec.Run, l),
				Expected: "one row per (subject, session, run)"}
		}
		first[k] = line
		// The key names the run's files (design/KEY.csv) and messages, so
		// two runs must not share it: (01, run 1_2) and (01_1, run 2) would.
		if l, dup := byName[spec.Key()]; dup {
			return nil, &InputError{File: name, Line: line,
				Found: fmt.Sprintf("subject %q, session %q, run %q make the run name %q, as line %d does with other labels",
					spec.Subject, spec.Session, spec.Run, spec.Key(), l),
				Expected: "labels that give every run its own name subject[_session]_run (for example without _ in the labels)"}
		}
		byName[spec.Key()] = line
		st.Runs = append(st.Runs, spec)
	}
	return st, nil
}

// checkTR says what is wrong with a repetition time, or returns "" when it
// is usable. text is the value as the person wrote it.
func checkTR(text string, tr float64) (found, expected string) {
	switch {
	case math.IsNaN(tr) || math.IsInf(tr, 0) || tr <= 0:
		return fmt.Sprintf("tr %s is not more than 0", text), "the repetition time in seconds, more than 0"
	case tr < MinTR:
		return fmt.Sprintf("tr %s is below %g s, shorter than any volume's acquisition", text, MinTR), "the repetition time in seconds, at least 0.01"
	case tr > maxTR:
		return fmt.Sprintf("tr %s is more than %d and looks like milliseconds", text, maxTR),
			fmt.Sprintf("the repetition time in seconds, at most %d (tr is in seconds: %s ms would be %g s)", maxTR, text, tr/1000)
	}
	return "", ""
}

// resolve makes p relative to dir unless it is absolute.
func resolve(dir, p string) string {
	if filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(dir, p)
}

// replayReader hands rows already split and checked to gocsv, which reads
// them through its CSVReader interface.
type replayReader struct {
	rows [][]string
	next int
}

func (r *replayReader) Read() ([]string, error) {
	if r.next >= len(r.rows) {
		return nil, io.EOF
	}
	r.next++
	return r.rows[r.next-1], nil
}

func (r *replayReader) ReadAll() ([][]string, error) {
	rest := r.rows[r.next:]
	r.next = len(r.rows)
	return rest, nil
}

package roi

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// NumericOptions controls what ReadNumeric accepts besides finite numbers.
type NumericOptions struct {
	// AllowMissing reads missing cells (empty, NA, n/a, NaN, nan) as NaN
	// instead of refusing them.
	AllowMissing bool
	// NonFiniteAsMissing reads Inf, -Inf and numbers that overflow a float64
	// (such as 1e400) as NaN instead of refusing them. It is meant for
	// signals read with censoring of bad volumes.
	NonFiniteAsMissing bool
	// MissingHint, when not empty, is added to the message that refuses a
	// missing cell, to say how missing values could be allowed.
	MissingHint string
}

// ReadNumeric reads a wide numeric table (signals or confounds) from path.
// See ParseNumeric for the rules.
func ReadNumeric(path string, opt NumericOptions) (*Numeric, error) {
	text, err := openText(path)
	if err != nil {
		return nil, err
	}
	return parseNumeric(path, text, opt)
}

// ParseNumeric reads a wide numeric table from r; name is the file name used
// in messages and stored as Path.
//
// The header names the columns: unique, non-empty after trimming spaces.
// Every row has exactly one cell per name; each cell is a finite number with
// a decimal point. Missing cells are refused unless opt.AllowMissing, and
// Inf, -Inf and numbers beyond the float64 range unless
// opt.NonFiniteAsMissing; either way they read as NaN. An empty line between
// rows is a missing cell in a one-column table and an error otherwise;
// blank lines at the end are ignored. A table with a header and no rows is
// an error. An *InputError locates the problem as file:line:column, the
// column counted in cells from 1.
func ParseNumeric(name string, r io.Reader, opt NumericOptions) (*Numeric, error) {
	text, err := readText(name, r)
	if err != nil {
		return nil, err
	}
	return parseNumeric(name, text, opt)
}

func parseNumeric(name, text string, opt NumericOptions) (*Numeric, error) {
	s := newScanner(name, text)
	names, hline, err := s.header("a header line naming the columns, then one row of numbers per volume")
	if err != nil {
		return nil, err
	}
	if err := headerLooksLikeData(s, names, hline); err != nil {
		return nil, err
	}
	m := len(names)
	// Room for every row up front; a row of m cells takes at least m bytes,
	// which bounds the guess when a wide header meets many short lines.
	rowsGuess := min(strings.Count(s.text, "\n")+1, len(s.text)/m+1)
	cols := make([][]float64, m)
	for j := range cols {
		cols[j] = make([]float64, 0, rowsGuess)
	}
	missingExpected := "a number"
	if opt.MissingHint != "" {
		missingExpected += "; " + opt.MissingHint
	}
	var blanks []int // lines of empty lines not yet known to be followed by a row
	for {
		rec, err := s.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		if rec.blank() {
			blanks = append(blanks, rec.line)
			continue
		}
		for _, line := range blanks {
			if m != 1 {
				return nil, s.raggedError(record{line: line, cells: []string{""}, quoted: []bool{false}}, m)
			}
			if !opt.AllowMissing {
				return nil, cellError(name, line, 1, names[0], "", cellMissing, missingExpected)
			}
			cols[0] = append(cols[0], math.NaN())
		}
		blanks = blanks[:0]
		if len(rec.cells) != m {
			return nil, s.raggedError(rec, m)
		}
		for j, cell := range rec.cells {
			v, st := parseCell(cell)
			switch st {
			case cellNumber:
			case cellMissing:
				if !opt.AllowMissing {
					return nil, cellError(name, rec.line, j+1, names[j], cell, st, missingExpected)
				}
				v = math.NaN()
			case cellInfinite, cellOverflow:
				if !opt.NonFiniteAsMissing {
					return nil, cellError(name, rec.line, j+1, names[j], cell, st, "")
				}
				v = math.NaN()
			default:
				return nil, cellError(name, rec.line, j+1, names[j], cell, st, "")
			}
			cols[j] = append(cols[j], v)
		}
	}
	if len(cols[0]) == 0 {
		return nil, &InputError{File: name, Line: hline,
			Found:    "a header and no rows",
			Expected: "one row of numbers per volume after the header"}
	}
	return &Numeric{Path: name, Names: names, Cols: cols}, nil
}

// headerLooksLikeData refuses a header whose names are all numbers and not
// all integers: such a table has lost its header line. (Integer names are
// accepted, since atlases often label regions 1, 2, 3, ...)
func headerLooksLikeData(s *scanner, names []string, line int) error {
	integers := true
	for _, n := range names {
		if _, st := parseCell(n); st != cellNumber {
			return nil
		}
		if _, err := strconv.ParseInt(n, 10, 64); err != nil {
			integers = false
		}
	}
	if integers {
		return nil
	}
	return &InputError{File: s.name, Line: line,
		Found:    fmt.Sprintf("the first line %q holds numbers, not column names", shorten(strings.Join(names, string(s.delim)), 40)),
		Expected: "a header line naming each column (for signals, one name per region) before the numbers"}
}

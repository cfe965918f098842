package roi

// The reader of wide numeric tables as it was before it streamed: the whole
// text in memory, split by the scanner that the other readers share. The
// tests compare the streaming reader with it.

import (
	"io"
	"math"
	"strings"
)

// parseNumericWhole reads r as ParseNumeric did before it streamed.
func parseNumericWhole(name string, r io.Reader, opt NumericOptions) (*Numeric, error) {
	text, err := readText(name, r)
	if err != nil {
		return nil, err
	}
	return parseNumericText(name, text, opt)
}

func parseNumericText(name, text string, opt NumericOptions) (*Numeric, error) {
	s := newScanner(name, text)
	names, hline, err := s.header("a header line naming the columns, then one row of numbers per volume")
	if err != nil {
		return nil, err
	}
	if err := headerLooksLikeData(name, s.delim, names, hline); err != nil {
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

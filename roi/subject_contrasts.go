package roi

import (
	"fmt"
	"io"
	"math"
	"strings"
)

// SubjectContrast is one row of a subject-level table: a subject's
// estimate of one contrast in one region. Numbers are NaN where the cell is
// missing or the table has no such column.
type SubjectContrast struct {
	Subject, Region, Contrast string
	Estimate, StdError, PSC   float64
	Line                      int // line in the file
}

// SubjectContrasts is a subject-level table such as the
// subject_contrasts.csv that `tessera fit` writes, or one with its columns
// made by another tool.
type SubjectContrasts struct {
	Path string
	Rows []SubjectContrast // in file order
	// HasStdError and HasPSC say whether the optional columns exist.
	HasStdError, HasPSC bool
}

// subjectColumns are the columns the reader uses: the first four are
// required, std_error and psc optional. The other columns of
// subject_contrasts.csv (runs, statistic, df, p_value, q_value) may be
// present and are not read.
var subjectColumns = []string{"subject", "region", "contrast", "estimate", "std_error", "psc"}

// ReadSubjectContrasts reads a subject-level table at path: columns
// subject, region, contrast and estimate, optionally std_error and psc
// (names matched ignoring case), one row per (subject, region, contrast);
// a repeated one is an error. Labels may not be missing. Numbers may be
// missing (empty, NA, n/a, NaN), which the group level reports and leaves
// out; any other text that is not a finite number is an error naming the
// cell.
func ReadSubjectContrasts(path string) (*SubjectContrasts, error) {
	text, err := openText(path)
	if err != nil {
		return nil, err
	}
	return parseSubjectContrasts(path, text)
}

// ParseSubjectContrasts reads a subject-level table from r, as
// ReadSubjectContrasts does; name is used in messages.
func ParseSubjectContrasts(name string, r io.Reader) (*SubjectContrasts, error) {
	text, err := readText(name, r)
	if err != nil {
		return nil, err
	}
	return parseSubjectContrasts(name, text)
}

func parseSubjectContrasts(name, text string) (*SubjectContrasts, error) {
	t, err := parseTable(name, text, "a header line with the columns subject, region, contrast and estimate, then one row per subject, region and contrast")
	if err != nil {
		return nil, err
	}
	cols := map[string]int{}
	for j, h := range t.Names {
		low := strings.ToLower(h)
		found := false
		for _, c := range subjectColumns {
			found = found || c == low
		}
		if !found {
			continue
		}
		if k, dup := cols[low]; dup {
			return nil, &InputError{File: name, Line: t.HeaderLine, Column: j + 1,
				Found:    fmt.Sprintf("column %d is named %q and column %d %q", j+1, h, k+1, t.Names[k]),
				Expected: "each of " + strings.Join(subjectColumns, ", ") + " at most once (names are read ignoring case)"}
		}
		cols[low] = j
	}
	var absent []string
	for _, c := range subjectColumns[:4] {
		if _, ok := cols[c]; !ok {
			absent = append(absent, fmt.Sprintf("%q", c))
		}
	}
	if len(absent) > 0 {
		return nil, &InputError{File: name, Line: t.HeaderLine,
			Found:    fmt.Sprintf("%s; the header has %s", noColumns(absent), quoteList(t.Names)),
			Expected: "the columns subject, region, contrast and estimate, and optionally std_error and psc (as in subject_contrasts.csv)"}
	}
	sc := &SubjectContrasts{Path: name}
	_, sc.HasStdError = cols["std_error"]
	_, sc.HasPSC = cols["psc"]
	type key struct{ subject, region, contrast string }
	first := map[key]int{}
	for i, row := range t.Rows {
		line := t.Lines[i]
		r := SubjectContrast{Line: line, Estimate: math.NaN(), StdError: math.NaN(), PSC: math.NaN()}
		for _, f := range []struct {
			col string
			dst *string
		}{{"subject", &r.Subject}, {"region", &r.Region}, {"contrast", &r.Contrast}} {
			j := cols[f.col]
			if isMissing(row[j]) {
				return nil, &InputError{File: name, Line: line, Column: j + 1, Field: t.Names[j],
					Found: describeMissing(row[j]), Expected: "a " + f.col + " label in every row"}
			}
			*f.dst = row[j]
		}
		for _, f := range []struct {
			col string
			dst *float64
		}{{"estimate", &r.Estimate}, {"std_error", &r.StdError}, {"psc", &r.PSC}} {
			j, ok := cols[f.col]
			if !ok {
				continue
			}
			v, st := parseCell(row[j])
			switch st {
			case cellNumber:
				*f.dst = v
			case cellMissing:
			default:
				return nil, cellError(name, line, j+1, t.Names[j], row[j], st, "")
			}
		}
		if !math.IsNaN(r.StdError) && r.StdError < 0 {
			j := cols["std_error"]
			return nil, &InputError{File: name, Line: line, Column: j + 1, Field: t.Names[j],
				Found: fmt.Sprintf("standard error %s is negative", row[j]), Expected: "a standard error of 0 or more"}
		}
		k := key{r.Subject, r.Region, r.Contrast}
		if l, dup := first[k]; dup {
			return nil, &InputError{File: name, Line: line,
				Found:    fmt.Sprintf("subject %q, region %q, contrast %q again: line %d has the same", r.Subject, r.Region, r.Contrast, l),
				Expected: "one row per (subject, region, contrast)"}
		}
		first[k] = line
		sc.Rows = append(sc.Rows, r)
	}
	if len(sc.Rows) == 0 {
		return nil, &InputError{File: name, Line: t.HeaderLine, Found: "a header and no rows",
			Expected: "one row per subject, region and contrast after the header"}
	}
	return sc, nil
}

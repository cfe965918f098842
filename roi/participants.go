package roi

import (
	"fmt"
	"io"
	"strings"
)

// Participants is a participants table: one row per subject, an identifier
// column and any other columns (group, age, ...), as in the BIDS
// participants.tsv.
type Participants struct {
	Path     string
	IDColumn string   // the identifier column's header name as written
	Columns  []string // every column, in file order
	table    *Table
	byLabel  map[string]int // SubjectLabel(id) → row
}

// SubjectLabel returns the bare subject label of an identifier: a "sub-"
// prefix, as BIDS writes participant_id, removed.
func SubjectLabel(id string) string { return strings.TrimPrefix(id, "sub-") }

// ReadParticipants reads the participants table at path. The identifier
// column is `subject` or BIDS's `participant_id` (matched ignoring case; if
// both exist `subject` is used). Identifiers are compared by SubjectLabel,
// so `sub-01` in the table matches the label `01` of a study table, and
// `sub-01` too. An empty or repeated identifier is an error. Other cells are
// read as text; see Text and Number.
func ReadParticipants(path string) (*Participants, error) {
	text, err := openText(path)
	if err != nil {
		return nil, err
	}
	return parseParticipants(path, text)
}

// ParseParticipants reads a participants table from r, as ReadParticipants
// does; name is used in messages.
func ParseParticipants(name string, r io.Reader) (*Participants, error) {
	text, err := readText(name, r)
	if err != nil {
		return nil, err
	}
	return parseParticipants(name, text)
}

func parseParticipants(name, text string) (*Participants, error) {
	t, err := parseTable(name, text, "a header line with a subject (or participant_id) column, then one row per subject")
	if err != nil {
		return nil, err
	}
	id := -1
	for _, want := range []string{"subject", "participant_id"} {
		for j, h := range t.Names {
			if id < 0 && strings.EqualFold(h, want) {
				id = j
			}
		}
	}
	if id < 0 {
		return nil, &InputError{File: name, Line: t.HeaderLine,
			Found:    fmt.Sprintf("no column \"subject\" or \"participant_id\"; the header has %s", quoteList(t.Names)),
			Expected: "a subject column (or participant_id, as in BIDS) naming each subject"}
	}
	p := &Participants{Path: name, IDColumn: t.Names[id], Columns: t.Names, table: t, byLabel: map[string]int{}}
	for i, row := range t.Rows {
		v := row[id]
		if isMissing(v) {
			return nil, &InputError{File: name, Line: t.Lines[i], Column: id + 1, Field: t.Names[id],
				Found: describeMissing(v), Expected: "a subject label in every row"}
		}
		label := SubjectLabel(v)
		if k, dup := p.byLabel[label]; dup {
			return nil, &InputError{File: name, Line: t.Lines[i], Column: id + 1, Field: t.Names[id],
				Found:    fmt.Sprintf("subject %q again: line %d names the same subject (%q)", v, t.Lines[k], t.Rows[k][id]),
				Expected: "one row per subject (a sub- prefix is ignored when labels are compared)"}
		}
		p.byLabel[label] = i
	}
	return p, nil
}

// Len is the number of subjects (rows).
func (p *Participants) Len() int { return len(p.table.Rows) }

// ID returns the identifier of row i as written.
func (p *Participants) ID(i int) string { return p.table.Rows[i][p.col(p.IDColumn)] }

// Row returns the row of a subject label (bare or with the sub- prefix), or
// -1 when the table has no such subject.
func (p *Participants) Row(subject string) int {
	if i, ok := p.byLabel[SubjectLabel(subject)]; ok {
		return i
	}
	return -1
}

// col returns the index of a column: its exact name, else the one column
// whose name matches ignoring case; -1 when there is none.
func (p *Participants) col(name string) int {
	if j := p.table.Col(name); j >= 0 {
		return j
	}
	found := -1
	for j, h := range p.table.Names {
		if strings.EqualFold(h, name) {
			if found >= 0 {
				return -1
			}
			found = j
		}
	}
	return found
}

// Require returns an error naming the header line when a column is absent.
func (p *Participants) Require(columns ...string) error {
	var absent []string
	for _, c := range columns {
		if p.col(c) < 0 {
			absent = append(absent, fmt.Sprintf("%q", c))
		}
	}
	if len(absent) == 0 {
		return nil
	}
	return &InputError{File: p.Path, Line: p.table.HeaderLine,
		Found:    fmt.Sprintf("%s; the header has %s", noColumns(absent), quoteList(p.table.Names)),
		Expected: "the columns named by --compare and --covariates"}
}

// Text returns the cell of row i in column, trimmed, and whether it is a
// missing value (empty, NA, n/a, NaN). The column must exist (Require).
func (p *Participants) Text(i int, column string) (string, bool) {
	v := p.table.Rows[i][p.mustCol(column)]
	return v, isMissing(v)
}

// Number returns the cell of row i in column as a number; a missing value
// is NaN without error, anything else that is not a finite number is an
// *InputError naming the cell. The column must exist (Require).
func (p *Participants) Number(i int, column string) (float64, error) {
	j := p.mustCol(column)
	v := p.table.Rows[i][j]
	x, st := parseCell(v)
	switch st {
	case cellNumber:
		return x, nil
	case cellMissing:
		return x, nil
	}
	e := cellError(p.Path, p.table.Lines[i], j+1, p.table.Names[j], v, st, "")
	e.Expected += " (a covariate is a number for every subject; leave the cell empty or n/a where it is unknown)"
	return 0, e
}

// Cell locates row i's cell in column for messages: "file:line:column".
func (p *Participants) Cell(i int, column string) string {
	return fmt.Sprintf("%s:%d:%d", p.Path, p.table.Lines[i], p.mustCol(column)+1)
}

func (p *Participants) mustCol(column string) int {
	j := p.col(column)
	if j < 0 {
		panic("roi: participants column " + column + " not checked with Require")
	}
	return j
}

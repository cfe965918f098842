package roi

import "io"

// Table is a delimited table read as text, for tables whose columns are
// interpreted by name (the study table, events, a participants table). It
// follows the format rules of the package; blank lines between rows are
// skipped, and every row has exactly one cell per header name.
type Table struct {
	Path       string
	Names      []string   // header, trimmed, in file order
	Rows       [][]string // Rows[i][j]: row i, column j, spaces around unquoted cells removed
	Lines      []int      // Lines[i]: the file line where row i starts
	HeaderLine int        // the file line of the header (1 unless blank lines precede it)
}

// Col returns the index of the column with the given header name, or -1.
func (t *Table) Col(name string) int {
	for j, h := range t.Names {
		if h == name {
			return j
		}
	}
	return -1
}

// ReadTable reads the table at path (see Table).
func ReadTable(path string) (*Table, error) {
	text, err := openText(path)
	if err != nil {
		return nil, err
	}
	return parseTable(path, text, "a header line naming the columns, then one row per line")
}

// ParseTable reads a table from r; name is used in messages.
func ParseTable(name string, r io.Reader) (*Table, error) {
	text, err := readText(name, r)
	if err != nil {
		return nil, err
	}
	return parseTable(name, text, "a header line naming the columns, then one row per line")
}

// parseTable splits text into a Table; what says what the table should
// hold, for the message about an empty file.
func parseTable(name, text, what string) (*Table, error) {
	s := newScanner(name, text)
	names, hline, err := s.header(what)
	if err != nil {
		return nil, err
	}
	t := &Table{Path: name, Names: names, HeaderLine: hline}
	n := len(names)
	for {
		rec, err := s.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		if rec.blank() && n > 1 {
			continue
		}
		if len(rec.cells) != n {
			return nil, s.raggedError(rec, n)
		}
		row := make([]string, n)
		copy(row, rec.cells)
		t.Rows = append(t.Rows, row)
		t.Lines = append(t.Lines, rec.line)
	}
	return t, nil
}

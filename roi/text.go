package roi

// The low-level text handling shared by every reader lives here, in one
// place: opening (and decompressing) a file, the byte-order mark, UTF-8
// validation, delimiter detection, splitting records into cells with quotes,
// the missing-value tokens, and the classification of a numeric cell.

import (
	"bufio"
	"compress/gzip"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"strconv"
	"strings"
	"unicode/utf8"
)

const (
	utf8BOM    = "\ufeff"
	gzipMagic  = "\x1f\x8b"
	utf16LEBOM = "\xff\xfe"
	utf16BEBOM = "\xfe\xff"
)

// isMissing reports whether a cell (already trimmed) is one of the tokens
// that mean a missing value: empty, NA, n/a, NaN, and also nan.
func isMissing(cell string) bool {
	switch cell {
	case "", "NA", "n/a", "NaN", "nan":
		return true
	}
	return false
}

// describeMissing says in words which missing-value token a cell holds.
func describeMissing(cell string) string {
	if cell == "" {
		return "empty cell"
	}
	return fmt.Sprintf("missing value %q", cell)
}

// openText reads the file at path as text (see readText).
func openText(path string) (string, error) {
	f, err := openFile(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	return readText(path, f)
}

// openFile opens the file at path for reading, with an *InputError when it
// cannot be.
func openFile(path string) (*os.File, error) {
	if err := checkReadable(path); err != nil {
		return nil, &InputError{File: path, Found: err.Error(), Expected: "a readable file"}
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, &InputError{File: path, Found: describeOpenError(err), Expected: "a readable file"}
	}
	return f, nil
}

// fileProblem is a reason a path cannot be read, in words.
type fileProblem string

func (p fileProblem) Error() string { return string(p) }

// checkReadable returns a fileProblem when path does not name a readable
// regular file.
func checkReadable(path string) error {
	st, err := os.Stat(path)
	if err != nil {
		return fileProblem(describeOpenError(err))
	}
	if st.IsDir() {
		return fileProblem("this is a folder, not a file")
	}
	return nil
}

func describeOpenError(err error) string {
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return "the file does not exist"
	case errors.Is(err, fs.ErrPermission):
		return "the file cannot be read (permission denied)"
	}
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return "the file cannot be opened: " + pe.Err.Error()
	}
	return "the file cannot be opened: " + err.Error()
}

// readText reads all of r as UTF-8 text. Input is gzip-decompressed when
// name ends in .gz or the bytes start with the gzip signature. A UTF-8
// byte-order mark is removed; UTF-16 text and invalid UTF-8 are refused with
// the line where the first bad byte is.
func readText(name string, r io.Reader) (string, error) {
	src, isGzip, done, err := decompress(name, r)
	if err != nil {
		return "", err
	}
	defer done()
	var sb strings.Builder
	if _, err := io.Copy(&sb, src); err != nil {
		return "", readError(name, isGzip, err)
	}
	text := sb.String()
	if err := checkUTF16(name, text); err != nil {
		return "", err
	}
	text = strings.TrimPrefix(text, utf8BOM)
	if !utf8.ValidString(text) {
		return "", invalidUTF8(name, text)
	}
	return text, nil
}

// decompress returns the bytes of r to read as text: gzip-decompressed when
// name ends in .gz or the bytes start with the gzip signature. done releases
// the decompressor.
func decompress(name string, r io.Reader) (src io.Reader, isGzip bool, done func(), err error) {
	br := bufio.NewReader(r)
	head, _ := br.Peek(len(gzipMagic))
	isGzip = string(head) == gzipMagic
	if strings.HasSuffix(strings.ToLower(name), ".gz") && !isGzip {
		return nil, false, nil, &InputError{File: name,
			Found:    "the name ends in .gz but the file is not gzip-compressed",
			Expected: "a gzip-compressed file, or a name without .gz"}
	}
	if !isGzip {
		return br, false, func() {}, nil
	}
	zr, err := gzip.NewReader(br)
	if err != nil {
		return nil, true, nil, &InputError{File: name, Found: "the compressed data is damaged (" + err.Error() + ")",
			Expected: "a complete gzip file"}
	}
	return zr, true, func() { zr.Close() }, nil
}

// readError describes an error met while reading the bytes of a file.
func readError(name string, isGzip bool, err error) *InputError {
	found := "the file could not be read (" + err.Error() + ")"
	if isGzip {
		found = "the compressed data is damaged (" + err.Error() + ")"
	}
	return &InputError{File: name, Found: found, Expected: "a complete, readable file"}
}

// checkUTF16 refuses text that starts with a UTF-16 byte-order mark.
func checkUTF16[T string | []byte](name string, text T) error {
	if len(text) >= 2 && (string(text[:2]) == utf16LEBOM || string(text[:2]) == utf16BEBOM) {
		return &InputError{File: name, Line: 1, Found: "the file is UTF-16 text",
			Expected: "UTF-8 text (save the table as CSV UTF-8 or plain UTF-8 text)"}
	}
	return nil
}

// invalidUTF8 locates the first byte of text that is not UTF-8.
func invalidUTF8(name, text string) *InputError {
	off := firstInvalidUTF8(text)
	start := strings.LastIndexAny(text[:off], "\r\n") + 1
	return invalidUTF8At(name, 1+countLineEnds(text[:off]), text[start:off], text[off])
}

// firstInvalidUTF8 returns the offset of the first byte of s that is not
// part of valid UTF-8 (len(s) when there is none).
func firstInvalidUTF8[T string | []byte](s T) int {
	off := 0
	for off < len(s) {
		if s[off] < utf8.RuneSelf {
			off++
			continue
		}
		r, size := utf8.DecodeRuneInString(string(s[off:min(off+utf8.UTFMax, len(s))]))
		if r == utf8.RuneError && size <= 1 {
			break
		}
		off += size
	}
	return off
}

// invalidUTF8At is the message for the byte bad, which is not UTF-8, on
// line; before is the text of the line before it.
func invalidUTF8At(name string, line int, before string, bad byte) *InputError {
	if len(before) > 30 {
		before = before[len(before)-30:]
	}
	return &InputError{File: name, Line: line,
		Found: fmt.Sprintf("byte 0x%02X after %q is not UTF-8 text (the file may be in a Latin-1 or Windows encoding)",
			bad, before),
		Expected: "UTF-8 text (save the table as CSV UTF-8 or plain UTF-8 text)"}
}

// countLineEnds counts line ends in s: "\r\n", "\n" and a lone "\r" each
// count once.
func countLineEnds(s string) int {
	n := 0
	for i := 0; i < len(s); i++ {
		switch s[i] {
		case '\n':
			n++
		case '\r':
			if i+1 < len(s) && s[i+1] == '\n' {
				continue // counted at the '\n'
			}
			n++
		}
	}
	return n
}

// detectDelimiter picks the delimiter of a table from its header line: the
// most frequent of comma, tab and semicolon outside quotes. A tie with comma
// goes to comma, a tie of tab and semicolon to tab, and a line with none of
// them (a one-column table) is read as comma-delimited.
func detectDelimiter(header string) byte {
	var d delimCount
	countDelims(&d, header)
	return d.pick()
}

// delimCount counts the delimiters of a header line outside quotes, so a
// header can be fed to it one physical line at a time.
type delimCount struct {
	comma, tab, semi int
	inQuotes         bool
}

// countDelims counts the delimiters of s up to its first line end outside
// quotes, and reports whether it met that line end. A line end inside quotes
// does not end the header line: when s is one physical line without its line
// end, the header line goes on to the next one while d.inQuotes.
func countDelims[T string | []byte](d *delimCount, s T) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '"':
			d.inQuotes = !d.inQuotes
		case d.inQuotes:
		case c == '\n' || c == '\r':
			return true
		case c == ',':
			d.comma++
		case c == '\t':
			d.tab++
		case c == ';':
			d.semi++
		}
	}
	return false
}

// pick returns the delimiter counted most often, ties broken as
// detectDelimiter says.
func (d *delimCount) pick() byte {
	best, n := byte(','), d.comma
	if d.tab > n {
		best, n = '\t', d.tab
	}
	if d.semi > n {
		best = ';'
	}
	return best
}

func delimName(d byte) string {
	switch d {
	case '\t':
		return "tab"
	case ';':
		return "semicolon"
	}
	return "comma"
}

// scanner splits delimited text into records. Cells are substrings of the
// text, so reading a cell allocates nothing unless it is quoted with doubled
// quotes inside. Quoting follows encoding/csv: a cell that starts with a
// quote runs to the matching quote, may hold delimiters and line ends, and
// writes a quote as two quotes. Spaces around a cell are dropped (tabs too
// when the delimiter is not a tab); a quote inside an unquoted cell is kept
// as text.
type scanner struct {
	name   string
	text   string
	delim  byte
	pos    int // next byte to read
	line   int // line of the byte at pos, from 1
	cells  []string
	quoted []bool
}

// record is one line (or more, when a quoted cell holds line ends) of a
// table. cells and quoted are reused by the next call to scanner.next.
type record struct {
	line   int // where the record starts
	cells  []string
	quoted []bool
}

// blank reports whether the record is an empty (or all-space) line.
func (r record) blank() bool {
	return len(r.cells) == 1 && !r.quoted[0] && r.cells[0] == ""
}

// newScanner prepares text for reading: blank lines before the header and
// at the end of the text are dropped, and the delimiter is detected from the
// header line.
func newScanner(name, text string) *scanner {
	s := &scanner{name: name, line: 1}
	text = strings.TrimRight(text, "\r\n")
	for len(text) > 0 && (text[0] == '\n' || text[0] == '\r') {
		if text[0] == '\n' || len(text) == 1 || text[1] != '\n' {
			s.line++
		}
		text = text[1:]
	}
	s.text = text
	s.delim = detectDelimiter(text)
	return s
}

func (s *scanner) isSpace(c byte) bool {
	return c == ' ' || (c == '\t' && s.delim != '\t')
}

// endLine consumes the line end at s.pos.
func (s *scanner) endLine() {
	if s.text[s.pos] == '\r' && s.pos+1 < len(s.text) && s.text[s.pos+1] == '\n' {
		s.pos++
	}
	s.pos++
	s.line++
}

// next returns the next record, or io.EOF after the last one.
func (s *scanner) next() (record, error) {
	if s.pos >= len(s.text) {
		return record{}, io.EOF
	}
	s.cells, s.quoted = s.cells[:0], s.quoted[:0]
	rec := record{line: s.line}
	text := s.text
	for {
		i := s.pos
		for i < len(text) && s.isSpace(text[i]) {
			i++
		}
		if i < len(text) && text[i] == '"' {
			cell, err := s.quotedCell(i)
			if err != nil {
				return record{}, err
			}
			s.cells = append(s.cells, cell)
			s.quoted = append(s.quoted, true)
		} else {
			k := s.pos
			for k < len(text) && text[k] != s.delim && text[k] != '\n' && text[k] != '\r' {
				k++
			}
			cell := text[s.pos:k]
			for len(cell) > 0 && s.isSpace(cell[0]) {
				cell = cell[1:]
			}
			for len(cell) > 0 && s.isSpace(cell[len(cell)-1]) {
				cell = cell[:len(cell)-1]
			}
			s.cells = append(s.cells, cell)
			s.quoted = append(s.quoted, false)
			s.pos = k
		}
		if s.pos >= len(text) {
			break
		}
		if text[s.pos] == s.delim {
			s.pos++
			continue
		}
		s.endLine() // quotedCell and the unquoted scan stop only at a delimiter or a line end
		break
	}
	rec.cells, rec.quoted = s.cells, s.quoted
	return rec, nil
}

// quotedCell reads the quoted cell whose opening quote is at text[open] and
// leaves s.pos at the delimiter or line end that follows it.
func (s *scanner) quotedCell(open int) (string, error) {
	text := s.text
	openLine := s.line
	i := open + 1
	escaped := false
	for {
		j := strings.IndexByte(text[i:], '"')
		if j < 0 {
			return "", &InputError{File: s.name, Line: openLine, Column: len(s.cells) + 1,
				Found:    "a quoted cell that is never closed",
				Expected: `a closing quote (") before the end of the file`}
		}
		s.line += countLineEnds(text[i : i+j])
		i += j + 1
		if i < len(text) && text[i] == '"' {
			escaped = true
			i++
			continue
		}
		break
	}
	cell := text[open+1 : i-1]
	if escaped {
		cell = strings.ReplaceAll(cell, `""`, `"`)
	}
	if strings.IndexByte(cell, '\r') >= 0 {
		cell = strings.ReplaceAll(cell, "\r\n", "\n")
	}
	for i < len(text) && s.isSpace(text[i]) {
		i++
	}
	if i < len(text) && text[i] != s.delim && text[i] != '\n' && text[i] != '\r' {
		end := i
		for end < len(text) && end < i+20 && text[end] != s.delim && text[end] != '\n' && text[end] != '\r' {
			end++
		}
		return "", &InputError{File: s.name, Line: s.line, Column: len(s.cells) + 1,
			Found:    fmt.Sprintf("text %q right after the closing quote of a quoted cell", text[i:end]),
			Expected: `the delimiter or the end of the line after a closing quote (inside a quoted cell write a quote as "")`}
	}
	s.pos = i
	return cell, nil
}

// header reads the header line: the names of the columns, trimmed,
// non-empty and unique. what says what the table should hold, for the
// message about an empty file.
func (s *scanner) header(what string) ([]string, int, error) {
	rec, err := s.next()
	if err == io.EOF {
		return nil, 0, &InputError{File: s.name, Found: "the file is empty", Expected: what}
	}
	if err != nil {
		return nil, 0, err
	}
	names, err := checkHeader(s.name, s.delim, rec)
	if err != nil {
		return nil, 0, err
	}
	return names, rec.line, nil
}

// checkHeader returns the names of the header record rec of a table
// delimited by delim, trimmed, or an error if one is empty or repeated.
func checkHeader(file string, delim byte, rec record) ([]string, error) {
	names := make([]string, len(rec.cells))
	seen := make(map[string]int, len(rec.cells))
	for j, cell := range rec.cells {
		name := strings.TrimSpace(cell)
		if name == "" {
			if j == len(rec.cells)-1 && j > 0 && !rec.quoted[j] {
				return nil, &InputError{File: file, Line: rec.line, Column: j + 1,
					Found: fmt.Sprintf("the header line ends with a %s, which makes an extra column with no name",
						delimName(delim)),
					Expected: "a name for every column (remove the " + delimName(delim) + " at the end of the line)"}
			}
			return nil, &InputError{File: file, Line: rec.line, Column: j + 1,
				Found: fmt.Sprintf("column %d of the header has no name", j+1), Expected: "a non-empty name for every column"}
		}
		if k, dup := seen[name]; dup {
			return nil, &InputError{File: file, Line: rec.line, Column: j + 1,
				Found:    fmt.Sprintf("column %d is named %q, like column %d", j+1, name, k+1),
				Expected: "a different name for every column"}
		}
		seen[name] = j
		names[j] = name
	}
	return names, nil
}

// raggedError describes a record whose cell count differs from the
// header's (want).
func (s *scanner) raggedError(rec record, want int) *InputError {
	n := len(rec.cells)
	e := &InputError{File: s.name, Line: rec.line}
	d := delimName(s.delim)
	switch {
	case rec.blank():
		e.Found = "an empty line"
		e.Expected = fmt.Sprintf("%d cells, one per header name (remove the empty line)", want)
	case s.delim == ',' && n > want && n <= 2*want && looksSplitDecimals(rec.cells):
		e.Found = fmt.Sprintf("found %d cells where the header has %d, and the line %q looks like numbers split at decimal commas",
			n, want, shorten(strings.Join(rec.cells, ","), 40))
		e.Expected = decimalCommaExpected
	case n == want+1 && rec.cells[n-1] == "" && !rec.quoted[n-1]:
		e.Found = fmt.Sprintf("found %d cells: the line ends with a %s, which makes an extra empty cell", n, d)
		e.Expected = fmt.Sprintf("%d cells, one per header name (remove the %s at the end of the line)", want, d)
	default:
		e.Found = fmt.Sprintf("found %d cells", n)
		e.Expected = fmt.Sprintf("%d cells, one per header name (cells are separated by a %s)", want, d)
	}
	return e
}

const decimalCommaExpected = "numbers with a decimal point: the table looks like it uses decimal commas, " +
	"and Tessera needs a decimal point (12.5, not 12,5)"

func shorten(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return s[:n] + "..."
}

// looksSplitDecimals reports whether every cell is a bare integer, as
// happens when a line of decimal-comma numbers is split at its commas (the
// caller also checks that there are at most twice the cells expected).
func looksSplitDecimals(cells []string) bool {
	for _, c := range cells {
		c = strings.TrimPrefix(strings.TrimPrefix(c, "-"), "+")
		if c == "" {
			return false
		}
		for i := 0; i < len(c); i++ {
			if c[i] < '0' || c[i] > '9' {
				return false
			}
		}
	}
	return true
}

// looksDecimalComma reports whether s reads as a number written with a
// decimal comma, such as 12,5 or -0,25 or 1.234,5.
func looksDecimalComma(s string) bool {
	s = strings.TrimPrefix(strings.TrimPrefix(s, "-"), "+")
	k := strings.IndexByte(s, ',')
	if k < 0 || strings.Count(s, ",") != 1 {
		return false
	}
	whole, frac := s[:k], s[k+1:]
	digits := 0
	for i := 0; i < len(whole); i++ {
		switch c := whole[i]; {
		case c >= '0' && c <= '9':
			digits++
		case c == '.':
		default:
			return false
		}
	}
	if digits == 0 || frac == "" {
		return false
	}
	for i := 0; i < len(frac); i++ {
		if frac[i] < '0' || frac[i] > '9' {
			return false
		}
	}
	return true
}

// cellStatus classifies the text of a numeric cell.
type cellStatus int

const (
	cellNumber       cellStatus = iota
	cellMissing                 // one of the missing-value tokens
	cellNotNumber               // text that is not a number
	cellDecimalComma            // a number written with a decimal comma
	cellInfinite                // Inf, -Inf, Infinity
	cellOverflow                // a number too large for a float64, such as 1e400
)

// goSyntax holds the characters that strconv.ParseFloat accepts from Go's
// syntax for numbers but a table of numbers does not use: digit separators
// (1_000) and hexadecimal mantissas and exponents (0x1p10). A cell with one
// of them is not a number, as in R or a spreadsheet; no decimal number, Inf,
// Infinity or NaN contains any of them.
const goSyntax = "_xXpP"

// parseCell reads a numeric cell; spaces around it (possible inside quotes)
// are ignored. A number too small for a float64 reads as the nearest
// representable value (0 or a subnormal), as strconv gives it.
func parseCell(s string) (float64, cellStatus) {
	s = strings.TrimSpace(s)
	if isMissing(s) {
		return math.NaN(), cellMissing
	}
	if strings.ContainsAny(s, goSyntax) {
		return 0, cellNotNumber
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		if ne, ok := err.(*strconv.NumError); ok && ne.Err == strconv.ErrRange {
			if math.IsInf(v, 0) {
				return v, cellOverflow
			}
			return v, cellNumber
		}
		if looksDecimalComma(s) {
			return 0, cellDecimalComma
		}
		return 0, cellNotNumber
	}
	switch {
	case math.IsInf(v, 0):
		return v, cellInfinite
	case math.IsNaN(v): // other spellings strconv accepts, such as "NAN"
		return v, cellMissing
	}
	return v, cellNumber
}

// cellError describes a numeric cell that could not be used. missing is
// what was expected instead of a missing value.
func cellError(file string, line, col int, field, cell string, st cellStatus, missing string) *InputError {
	e := &InputError{File: file, Line: line, Column: col, Field: field}
	switch st {
	case cellMissing:
		e.Found = describeMissing(cell)
		e.Expected = missing
	case cellDecimalComma:
		e.Found = fmt.Sprintf("%q is written with a decimal comma", cell)
		e.Expected = decimalCommaExpected
	case cellInfinite:
		e.Found = fmt.Sprintf("%q is not a finite number", cell)
		e.Expected = "a finite number"
	case cellOverflow:
		e.Found = fmt.Sprintf("%q is too large for a number and overflows to infinity", cell)
		e.Expected = "a finite number"
	default:
		e.Found = fmt.Sprintf("%q is not a number", cell)
		e.Expected = "a number with a decimal point"
	}
	return e
}

// formatLines lists line numbers for a message: "line 4", "lines 4, 9",
// "lines 7-9, 15". Runs of three or more consecutive lines become ranges.
func formatLines(lines []int) string {
	if len(lines) == 1 {
		return "line " + strconv.Itoa(lines[0])
	}
	var parts []string
	for i := 0; i < len(lines); {
		j := i
		for j+1 < len(lines) && lines[j+1] == lines[j]+1 {
			j++
		}
		switch {
		case j-i >= 2:
			parts = append(parts, fmt.Sprintf("%d-%d", lines[i], lines[j]))
		default:
			for k := i; k <= j; k++ {
				parts = append(parts, strconv.Itoa(lines[k]))
			}
		}
		i = j + 1
	}
	return "lines " + strings.Join(parts, ", ")
}

// plural picks the singular or plural form for n things.
func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

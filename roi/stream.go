package roi

// The streaming side of the numeric reader: a wide table (signals or
// confounds) is read one physical line at a time through a buffer that holds
// about one record, and its numbers go straight into the columns, so reading
// a table costs its float64s and not its text as well. The rules are those
// of the whole-text scanner in text.go, which the other readers use: the
// same line ends, quotes, spaces, delimiter detection, byte-order marks and
// messages.

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"strconv"
	"unicode/utf8"
)

// The line buffer's first size, and the free room it keeps for each read
// (variables so that tests can make them tiny).
var (
	firstBuffer = 256 << 10
	minRead     = 64 << 10
)

// lineReader hands out the physical lines of a text stream: a line ends at
// "\n", "\r\n" or a lone "\r". The bytes from keep on stay in the buffer
// when it is refilled, so a record that spans lines (a quoted cell with line
// ends inside) stays in one piece; everything before keep may be dropped.
type lineReader struct {
	name   string
	src    io.Reader
	isGzip bool
	buf    []byte
	n      int // buf[:n] holds the bytes read and not dropped
	keep   int // buf[keep:n] survives a refill
	start  int // the current line is buf[start:end]
	end    int
	next   int   // the current line's line end is buf[end:next]
	lf     int   // no '\n' in buf[next:lf) (or in buf[start:lf) while a line is looked for)
	line   int   // number of the current line, from 1
	eof    bool  // src is exhausted
	err    error // the read error met, returned again by later reads
	read   int64 // bytes read from src
}

// readLine moves to the next physical line and checks that it is UTF-8. It
// reports false at the end of the text.
func (l *lineReader) readLine() (bool, error) {
	l.start = l.next
	l.lf = max(l.lf, l.start)
	crFrom := 0 // no '\r' in buf[start:start+crFrom)
	for {
		if l.lf < l.n && l.buf[l.lf] != '\n' {
			if k := bytes.IndexByte(l.buf[l.lf:l.n], '\n'); k >= 0 {
				l.lf += k
			} else {
				l.lf = l.n
			}
		}
		if c := bytes.IndexByte(l.buf[l.start+crFrom:l.lf], '\r'); c >= 0 {
			c += l.start + crFrom
			if c+1 < l.n || l.eof {
				l.end, l.next = c, c+1
				if c+1 < l.n && l.buf[c+1] == '\n' {
					l.next = c + 2
				}
				break
			}
			crFrom = c - l.start // a '\r' last in the buffer: "\r\n" or a lone "\r"?
		} else {
			crFrom = l.lf - l.start
			if l.lf < l.n {
				l.end, l.next = l.lf, l.lf+1
				break
			}
			if l.eof {
				if l.start == l.n {
					return false, nil
				}
				l.end, l.next = l.n, l.n
				break
			}
		}
		if err := l.fill(); err != nil {
			return false, err
		}
	}
	l.line++
	if text := l.buf[l.start:l.end]; !utf8.Valid(text) {
		off := firstInvalidUTF8(text)
		return false, invalidUTF8At(l.name, l.line, string(text[:off]), text[off])
	}
	return true, nil
}

// fill reads more of src into the buffer, first moving buf[keep:n] to the
// front or growing the buffer when little room is left.
func (l *lineReader) fill() error {
	if l.err != nil {
		return l.err
	}
	if len(l.buf)-l.n < minRead && l.keep > 0 {
		d := l.keep
		copy(l.buf, l.buf[d:l.n])
		l.n -= d
		l.keep, l.start, l.end, l.next, l.lf = 0, l.start-d, l.end-d, l.next-d, l.lf-d
	}
	if len(l.buf)-l.n < minRead {
		nb := make([]byte, max(2*len(l.buf), l.n+minRead, firstBuffer))
		copy(nb, l.buf[:l.n])
		l.buf = nb
	}
	for {
		k, err := l.src.Read(l.buf[l.n:])
		l.n += k
		l.read += int64(k)
		switch {
		case err == io.EOF:
			l.eof = true
			return nil
		case err != nil:
			l.err = readError(l.name, l.isGzip, err)
			return l.err
		case k > 0:
			return nil
		}
	}
}

// consumed is the number of bytes of the text up to the end of the current
// line's line end.
func (l *lineReader) consumed() int64 {
	return l.read - int64(l.n-l.next)
}

// span is a cell of the current record: buf[keep+lo : keep+hi].
type span struct {
	lo, hi int
	quoted bool
}

// numReader splits a stream into records as the scanner in text.go splits a
// whole text.
type numReader struct {
	lineReader
	delim   byte
	recLine int    // the line where the current record starts
	cells   []span // the current record's cells, reused
}

// newNumReader starts reading src, the text of the file name: UTF-16 is
// refused and a UTF-8 byte-order mark skipped.
func newNumReader(name string, src io.Reader, isGzip bool) (*numReader, error) {
	r := &numReader{lineReader: lineReader{name: name, src: src, isGzip: isGzip}}
	for r.n < len(utf8BOM) && !r.eof {
		if err := r.fill(); err != nil {
			return nil, err
		}
	}
	if err := checkUTF16(name, r.buf[:r.n]); err != nil {
		return nil, err
	}
	if bytes.HasPrefix(r.buf[:r.n], []byte(utf8BOM)) {
		r.next, r.keep = len(utf8BOM), len(utf8BOM)
	}
	return r, nil
}

func (r *numReader) isSpace(c byte) bool {
	return c == ' ' || (c == '\t' && r.delim != '\t')
}

// header skips the empty lines before the header, detects the delimiter
// from the header line and reads the header's names. what says what the
// table should hold, for the message about an empty file.
func (r *numReader) header(what string) ([]string, int, error) {
	for {
		ok, err := r.readLine()
		if err != nil {
			return nil, 0, err
		}
		if !ok {
			return nil, 0, &InputError{File: r.name, Found: "the file is empty", Expected: what}
		}
		if r.start < r.end {
			break
		}
		r.keep = r.next
	}
	// The delimiter counts run to the end of the header line outside quotes,
	// which may be lines further on; then the header is read again from its
	// start.
	r.keep = r.start
	hline := r.line
	var d delimCount
	countDelims(&d, r.buf[r.start:r.end])
	for d.inQuotes {
		ok, err := r.readLine()
		if err != nil {
			return nil, 0, err
		}
		if !ok {
			break
		}
		countDelims(&d, r.buf[r.start:r.end])
	}
	r.delim = d.pick()
	r.next, r.lf, r.line = r.keep, r.keep, hline-1
	if _, err := r.nextRecord(); err != nil {
		return nil, 0, err
	}
	names, err := checkHeader(r.name, r.delim, r.stringRecord())
	if err != nil {
		return nil, 0, err
	}
	for j, n := range names {
		// A region or confound named like a missing value would come back
		// as one from every results table (R, pandas, tessera group).
		if isMissing(n) {
			return nil, 0, &InputError{File: r.name, Line: hline, Column: j + 1,
				Found:    fmt.Sprintf("column %d is named %q, which tables read as a missing value", j+1, n),
				Expected: "a column name that is not NA, n/a, NaN or nan"}
		}
	}
	return names, hline, nil
}

// nextRecord reads the next record into r.cells; it reports false at the
// end of the text.
func (r *numReader) nextRecord() (bool, error) {
	ok, err := r.readLine()
	if !ok || err != nil {
		return false, err
	}
	r.keep = r.start
	r.recLine = r.line
	r.cells = r.cells[:0]
	pos := r.start
	for {
		i := pos
		for i < r.end && r.isSpace(r.buf[i]) {
			i++
		}
		if i < r.end && r.buf[i] == '"' {
			if pos, err = r.quotedCell(i); err != nil {
				return false, err
			}
		} else {
			k := r.end
			if d := bytes.IndexByte(r.buf[pos:r.end], r.delim); d >= 0 {
				k = pos + d
			}
			hi := k
			for hi > i && r.isSpace(r.buf[hi-1]) {
				hi--
			}
			r.cells = append(r.cells, span{lo: i - r.keep, hi: hi - r.keep})
			pos = k
		}
		if pos == r.end {
			return true, nil
		}
		pos++ // past the delimiter
	}
}

// quotedCell reads the quoted cell whose opening quote is at buf[open],
// reading further lines while the cell is open, and returns where the cell
// ends: at a delimiter or the end of the current line.
func (r *numReader) quotedCell(open int) (int, error) {
	openLine, col := r.line, len(r.cells)+1
	lo := open + 1 - r.keep // offsets from keep survive a refill
	from := lo
	escaped := false
	var q int // the closing quote
	for {
		j := r.keep + from
		if k := bytes.IndexByte(r.buf[j:r.end], '"'); k >= 0 {
			q = j + k
			if q+1 < r.end && r.buf[q+1] == '"' {
				escaped = true
				from = q + 2 - r.keep
				continue
			}
			break
		}
		ok, err := r.readLine()
		if err != nil {
			return 0, err
		}
		if !ok {
			return 0, &InputError{File: r.name, Line: openLine, Column: col,
				Found:    "a quoted cell that is never closed",
				Expected: `a closing quote (") before the end of the file`}
		}
		from = r.start - r.keep
	}
	hi := q - r.keep
	if cell := r.buf[r.keep+lo : q]; escaped || bytes.IndexByte(cell, '\r') >= 0 {
		hi = lo + unquote(cell)
	}
	i := q + 1
	for i < r.end && r.isSpace(r.buf[i]) {
		i++
	}
	if i < r.end && r.buf[i] != r.delim {
		end := i
		for end < r.end && end < i+20 && r.buf[end] != r.delim {
			end++
		}
		return 0, &InputError{File: r.name, Line: r.line, Column: col,
			Found:    fmt.Sprintf("text %q right after the closing quote of a quoted cell", r.buf[i:end]),
			Expected: `the delimiter or the end of the line after a closing quote (inside a quoted cell write a quote as "")`}
	}
	r.cells = append(r.cells, span{lo: lo, hi: hi, quoted: true})
	return i, nil
}

// unquote rewrites the inside of a quoted cell in place, a doubled quote as
// one quote and "\r\n" as "\n", and returns its new length.
func unquote(b []byte) int {
	w := 0
	for i := 0; i < len(b); i++ {
		c := b[i]
		switch {
		case c == '"':
			i++ // inside a quoted cell quotes come in pairs
		case c == '\r' && i+1 < len(b) && b[i+1] == '\n':
			continue
		}
		b[w] = c
		w++
	}
	return w
}

// cell returns the bytes of cell c of the current record.
func (r *numReader) cell(c span) []byte {
	return r.buf[r.keep+c.lo : r.keep+c.hi]
}

// blank reports whether the current record is an empty (or all-space) line.
func (r *numReader) blank() bool {
	return len(r.cells) == 1 && !r.cells[0].quoted && r.cells[0].lo == r.cells[0].hi
}

// stringRecord copies the current record, for the header and for messages.
func (r *numReader) stringRecord() record {
	rec := record{line: r.recLine, cells: make([]string, len(r.cells)), quoted: make([]bool, len(r.cells))}
	for j, c := range r.cells {
		rec.cells[j], rec.quoted[j] = string(r.cell(c)), c.quoted
	}
	return rec
}

// raggedError describes rec, whose cell count is not want.
func (r *numReader) raggedError(rec record, want int) *InputError {
	return (&scanner{name: r.name, delim: r.delim}).raggedError(rec, want)
}

// parseCellBytes is parseCell for a cell in the line buffer; it allocates
// nothing for a number or a missing-value token.
func parseCellBytes(b []byte) (float64, cellStatus) {
	// Spaces are bytes up to ' ' or start with a byte of 0x80 or more, and end
	// with one (a UTF-8 continuation byte): most cells need no trimming.
	if n := len(b); n == 0 || b[0] <= ' ' || b[0] >= utf8.RuneSelf || b[n-1] <= ' ' || b[n-1] >= utf8.RuneSelf {
		b = bytes.TrimSpace(b)
	}
	if v, ok := parseDecimal(b); ok {
		return v, cellNumber
	}
	switch string(b) {
	case "", "NA", "n/a", "NaN", "nan":
		return math.NaN(), cellMissing
	}
	if bytes.ContainsAny(b, goSyntax) {
		return 0, cellNotNumber
	}
	v, err := strconv.ParseFloat(string(b), 64)
	switch {
	case err != nil:
		return parseCell(string(b)) // out of range or not a number: rare, let parseCell say which
	case math.IsInf(v, 0):
		return v, cellInfinite
	case math.IsNaN(v):
		return v, cellMissing
	}
	return v, cellNumber
}

// colStore gathers a table's numbers row by row into columns: rows wait in
// a small row-major block and are moved to the columns a block at a time,
// which all live in one backing array with room for the rows expected.
type colStore struct {
	m      int
	block  []float64 // rows not yet in the columns, one after the other
	nb     int       // rows in block
	bcap   int       // rows block holds
	back   []float64 // column j is back[j*stride : j*stride+rows]
	stride int
	rows   int
	// expect returns the number of rows the table is expected to have, given
	// the rows read so far, or 0 when it cannot tell.
	expect func(rows int) int
}

func newColStore(m int, expect func(int) int) *colStore {
	bcap := max(8, min(256, (64<<10)/m)) // a cache line per column per block, at least
	return &colStore{m: m, bcap: bcap, block: make([]float64, bcap*m), expect: expect}
}

// row returns room for the next row; commit adds it to the table.
func (s *colStore) row() []float64 {
	return s.block[s.nb*s.m : (s.nb+1)*s.m]
}

func (s *colStore) commit() {
	s.nb++
	if s.nb == s.bcap {
		s.flush(false)
	}
}

// flush moves the block's rows to the columns. When the columns are full
// they are moved to a larger backing array: at the end of the table (last)
// just large enough; otherwise as large as expected, or larger than now by a
// fraction when that is too little.
func (s *colStore) flush(last bool) {
	need := s.rows + s.nb
	if need > s.stride {
		stride := need
		if !last {
			want := s.expect(need)
			switch {
			case want == 0:
				stride = max(need, 2*s.stride) + s.bcap
			case s.back == nil:
				stride = max(need, want)
			default:
				stride = max(need, want, s.stride+s.stride/8)
			}
		}
		s.resize(stride)
	}
	for j := 0; j < s.m; j++ {
		col := s.back[j*s.stride+s.rows : j*s.stride+need]
		for t := range col {
			col[t] = s.block[t*s.m+j]
		}
	}
	s.rows, s.nb = need, 0
}

// resize moves the columns to a backing array of the given stride.
func (s *colStore) resize(stride int) {
	back := make([]float64, s.m*stride)
	for j := 0; j < s.m && s.rows > 0; j++ {
		copy(back[j*stride:j*stride+s.rows], s.back[j*s.stride:j*s.stride+s.rows])
	}
	s.back, s.stride = back, stride
}

// columns ends the table and returns its columns. Room left over from a
// guess too large by more than a sixteenth is given back.
func (s *colStore) columns() [][]float64 {
	s.flush(true)
	s.block = nil
	if s.stride-s.rows > s.rows/16 {
		s.resize(s.rows)
	}
	cols := make([][]float64, s.m)
	for j := range cols {
		o := j * s.stride
		cols[j] = s.back[o : o+s.rows : o+s.rows]
	}
	return cols
}

// guessRows guesses the rows of a table of size bytes (0 if not known)
// whose header ends at byte headerEnd and whose first rows end at byte done:
// the rest of the text in rows as long as those, and a hundredth more. It
// returns 0 when it cannot tell.
func guessRows(size, headerEnd, done int64, rows int) int {
	if size <= done || done <= headerEnd || rows <= 0 {
		return 0
	}
	perRow := float64(done-headerEnd) / float64(rows)
	return rows + int(float64(size-done)/perRow*1.01) + 1
}

// parseNumericStream reads the numeric table whose bytes src gives (already
// decompressed). size is the length of the text when known, else 0: it is
// used to guess the number of rows from the length of the first ones.
func parseNumericStream(name string, src io.Reader, isGzip bool, size int64, opt NumericOptions) (*Numeric, error) {
	r, err := newNumReader(name, src, isGzip)
	if err != nil {
		return nil, err
	}
	names, hline, err := r.header("a header line naming the columns, then one row of numbers per volume")
	if err != nil {
		return nil, err
	}
	if err := headerLooksLikeData(name, r.delim, names, hline); err != nil {
		return nil, err
	}
	m := len(names)
	headerEnd := r.consumed()
	st := newColStore(m, func(rows int) int { return guessRows(size, headerEnd, r.consumed(), rows) })
	missingExpected := "a number"
	if opt.MissingHint != "" {
		missingExpected += "; " + opt.MissingHint
	}
	var blanks []int // lines of empty lines not yet known to be followed by a row
	for {
		ok, err := r.nextRecord()
		if err != nil {
			return nil, err
		}
		if !ok {
			break
		}
		if r.blank() {
			blanks = append(blanks, r.recLine)
			continue
		}
		for _, line := range blanks {
			if m != 1 {
				return nil, r.raggedError(record{line: line, cells: []string{""}, quoted: []bool{false}}, m)
			}
			if !opt.AllowMissing {
				return nil, cellError(name, line, 1, names[0], "", cellMissing, missingExpected)
			}
			st.row()[0] = math.NaN()
			st.commit()
		}
		blanks = blanks[:0]
		if len(r.cells) != m {
			return nil, r.raggedError(r.stringRecord(), m)
		}
		row := st.row()
		for j, c := range r.cells {
			b := r.cell(c)
			v, stat := parseCellBytes(b)
			switch stat {
			case cellNumber:
			case cellMissing:
				if !opt.AllowMissing {
					return nil, cellError(name, r.recLine, j+1, names[j], string(b), stat, missingExpected)
				}
				v = math.NaN()
			case cellInfinite, cellOverflow:
				if !opt.NonFiniteAsMissing {
					return nil, cellError(name, r.recLine, j+1, names[j], string(b), stat, "")
				}
				v = math.NaN()
			default:
				return nil, cellError(name, r.recLine, j+1, names[j], string(b), stat, "")
			}
			row[j] = v
		}
		st.commit()
	}
	if st.rows+st.nb == 0 {
		return nil, &InputError{File: name, Line: hline,
			Found:    "a header and no rows",
			Expected: "one row of numbers per volume after the header"}
	}
	return &Numeric{Path: name, Names: names, Cols: st.columns()}, nil
}

package report

import (
	"io"
	"math"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"unicode"
	"unicode/utf8"
)

// The result tables are written by tableWriter, a buffered appender that
// encodes cells exactly as encoding/csv's Writer does with its defaults
// (Comma ',', UseCRLF false) but formats numbers straight into its buffer
// and writes whole buffers, without a string per cell. Tables of the
// throughput study hold millions of cells, and encoding/csv plus a string
// per number was most of the time a fit spent writing them.

// flushSize is the buffered size at which a tableWriter hands its bytes to
// the file: large enough that a write is one system call on an empty
// bufio.Writer (which passes large writes straight through).
const flushSize = 1 << 18

// AppendNum appends Num(v) to dst: the shortest form that round-trips a
// float64, nothing for NaN and infinities. The writers use it so that a
// number goes into the output buffer without a string of its own.
func AppendNum(dst []byte, v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return dst
	}
	return strconv.AppendFloat(dst, v, 'g', -1, 64)
}

// fieldNeedsQuotes is encoding/csv's rule for its default Writer (Go's
// src/encoding/csv/writer.go, Writer.fieldNeedsQuotes with Comma ','): a
// field is quoted when it is `\.`, holds a comma, a double quote, \r or \n,
// or begins with a space as unicode.IsSpace sees it; the empty field is not.
func fieldNeedsQuotes(field string) bool {
	if field == "" {
		return false
	}
	if field == `\.` {
		return true
	}
	for i := 0; i < len(field); i++ {
		switch field[i] {
		case '\n', '\r', '"', ',':
			return true
		}
	}
	r1, _ := utf8.DecodeRuneInString(field)
	return unicode.IsSpace(r1)
}

// appendField appends one CSV field as encoding/csv's default Writer writes
// it: verbatim, or quoted with inner quotes doubled (\r and \n stay as they
// are, since UseCRLF is false).
func appendField(dst []byte, field string) []byte {
	if !fieldNeedsQuotes(field) {
		return append(dst, field...)
	}
	dst = append(dst, '"')
	for {
		i := strings.IndexByte(field, '"')
		if i < 0 {
			break
		}
		dst = append(dst, field[:i+1]...)
		dst = append(dst, '"')
		field = field[i+1:]
	}
	dst = append(dst, field...)
	return append(dst, '"')
}

// cellRun is a run of cells already encoded and joined by commas, for
// cells that repeat on many rows (subject, session, run, region), so that
// they are checked for quoting once rather than on every row.
type cellRun struct {
	b []byte
	n int
}

// set encodes cells into c, reusing its buffer.
func (c *cellRun) set(cells ...string) {
	c.b = c.b[:0]
	for i, s := range cells {
		if i > 0 {
			c.b = append(c.b, ',')
		}
		c.b = appendField(c.b, s)
	}
	c.n = len(cells)
}

// tableWriter writes one CSV table. Cells of a row are appended one at a
// time (str, num, integer, cells, nums) and end closes the row. The first
// write error is kept, later writes are dropped, and close reports it.
type tableWriter struct {
	w    io.Writer
	buf  []byte
	cols int    // cells per row; 0 accepts any number
	n    int    // cells in the current row
	tmp  []byte // scratch of nums
	err  error
}

// newTableWriter returns a writer of rows of cols cells (0: any) into w.
// With w nil the rows stay in the buffer (see writeParts).
func newTableWriter(w io.Writer, cols int) *tableWriter {
	return &tableWriter{w: w, buf: make([]byte, 0, flushSize+4096), cols: cols}
}

// newTable starts the file of def in out and writes its header.
func newTable(out *Output, def TableDef) (*tableWriter, error) {
	f, err := out.Create(def.File)
	if err != nil {
		return nil, err
	}
	tw := newTableWriter(f, len(def.Columns))
	tw.record(def.Header())
	return tw, nil
}

// sep starts a cell: a comma unless it is the row's first.
func (t *tableWriter) sep() {
	if t.n > 0 {
		t.buf = append(t.buf, ',')
	}
	t.n++
}

// str appends a text cell, quoted where encoding/csv would quote it.
func (t *tableWriter) str(s string) {
	t.sep()
	t.buf = appendField(t.buf, s)
}

// num appends Num(v). A formatted number holds only digits, '.', 'e', '+'
// and '-' (or nothing), so it never needs quotes.
func (t *tableWriter) num(v float64) {
	t.sep()
	t.buf = AppendNum(t.buf, v)
}

// integer appends strconv.Itoa(v), which never needs quotes.
func (t *tableWriter) integer(v int) {
	t.sep()
	t.buf = strconv.AppendInt(t.buf, int64(v), 10)
}

// cells appends cells encoded beforehand.
func (t *tableWriter) cells(c *cellRun) {
	if c.n == 0 {
		return
	}
	if t.n > 0 {
		t.buf = append(t.buf, ',')
	}
	t.buf = append(t.buf, c.b...)
	t.n += c.n
}

// nums appends one cell of the numbers vs formatted by Num and joined by
// single spaces (strings.Join of the Num strings). The cell can need quotes
// only when it begins with a space, which a leading NaN gives.
func (t *tableWriter) nums(vs []float64) {
	t.sep()
	t.tmp = t.tmp[:0]
	for i, v := range vs {
		if i > 0 {
			t.tmp = append(t.tmp, ' ')
		}
		t.tmp = AppendNum(t.tmp, v)
	}
	if len(t.tmp) > 0 && t.tmp[0] == ' ' {
		t.buf = append(t.buf, '"')
		t.buf = append(t.buf, t.tmp...)
		t.buf = append(t.buf, '"')
		return
	}
	t.buf = append(t.buf, t.tmp...)
}

// end finishes the row. A row whose cell count differs from its table's
// columns is a bug in the writer, not a problem of the input, hence the
// panic.
func (t *tableWriter) end() {
	if t.cols > 0 && t.n != t.cols {
		panic("report: row does not match its table definition")
	}
	t.buf = append(t.buf, '\n')
	t.n = 0
	if len(t.buf) >= flushSize && t.w != nil {
		t.flush()
	}
}

// record writes one row of text cells.
func (t *tableWriter) record(cells []string) {
	for _, c := range cells {
		t.str(c)
	}
	t.end()
}

// row writes one row of text cells, checked against the table's columns.
func (t *tableWriter) row(cells ...string) {
	t.record(cells)
}

// flush hands the buffered bytes to the file.
func (t *tableWriter) flush() {
	if t.err == nil && len(t.buf) > 0 {
		_, t.err = t.w.Write(t.buf)
	}
	t.buf = t.buf[:0]
}

// close writes what is buffered and returns the first write error.
func (t *tableWriter) close() error {
	t.flush()
	return t.err
}

// partRegions is how many regions make one part of a table written by
// writeParts: a few hundred kilobytes of rows, so that the parts in flight
// hold little memory however many regions a run has.
const partRegions = 256

// writeParts writes the table def whose rows, in order, are those that
// parts[0], parts[1], ... append. Parts are formatted concurrently (up to
// GOMAXPROCS at once), each into a buffer of its own, and the buffers are
// written in part order, so the file is byte for byte the one that
// formatting the parts one after the other gives. At most twice as many
// buffers as workers exist at once, which bounds the memory.
func writeParts(out *Output, def TableDef, parts []func(t *tableWriter)) error {
	tw, err := newTable(out, def)
	if err != nil {
		return err
	}
	return tw.parts(parts, runtime.GOMAXPROCS(0))
}

// parts appends the rows of parts (see writeParts) with up to workers
// goroutines and returns the first write error.
func (tw *tableWriter) parts(parts []func(t *tableWriter), workers int) error {
	workers = min(workers, len(parts))
	if workers <= 1 {
		for _, p := range parts {
			p(tw)
		}
		return tw.close()
	}
	tw.flush()
	free := make(chan *tableWriter, 2*workers)
	for range cap(free) {
		free <- &tableWriter{cols: tw.cols}
	}
	done := make([]chan *tableWriter, len(parts))
	for i := range done {
		done[i] = make(chan *tableWriter, 1)
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Go(func() {
			for {
				// Take a buffer before claiming a part: the part the
				// writer waits for then always has its buffer.
				b := <-free
				i := int(next.Add(1) - 1)
				if i >= len(parts) {
					free <- b
					return
				}
				b.buf = b.buf[:0]
				parts[i](b)
				done[i] <- b
			}
		})
	}
	for i := range parts {
		b := <-done[i]
		if tw.err == nil {
			_, tw.err = tw.w.Write(b.buf)
		}
		free <- b
	}
	wg.Wait()
	return tw.err
}

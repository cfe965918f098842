package roi

import (
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"testing/iotest"
	"unicode/utf8"
)

// streamCases are inputs where the streaming reader could part from the
// whole-text one: line ends, quotes over lines, spaces, byte-order marks,
// blank lines, and every kind of refusal.
var streamCases = []string{
	"a,b\n1,2\n3,4\n",
	"a,b\r\n1,2\r\n3,4\r\n",
	"a,b\r1,2\r3,4\r",
	"a,b\r\n1,2\r3,4\n5,6",
	"\ufeffa;b\r\n1;2\r\n",
	"\ufeff\n\r\n\ra\tb\n1\t2\n",
	"\n\n\r\n",
	"",
	"\ufeff",
	"a",
	"a\n",
	"a\n1",
	"a\n1\r",
	"a\n1\n\n2\n\n\n",
	"a\n1\n\n2\n \n",
	"a,b\n1,2\n\n3,4\n",
	"a,b\n1,2\n \t\n",
	"a\tb\n1,5\t2\n",
	"a,b\n1,2,\n",
	"a,b,\n1,2\n",
	"a,,b\n1,2,3\n",
	"a,b\n12,5,13,75\n",
	"a\n12,5\n",
	"a;b\n12,5;1\n",
	"\"x,y\",z\n1,2\n",
	"\"x\ny\",z\n1,2\n",
	"\"x\r\ny\",\"z\"\"w\"\n1,2\n",
	"\"x\ry\";z\n1;2\n",
	"a,\"b\n",
	"a,\"b\n1,2\n3,4\n",
	"a,\"b\"x\n1,2\n",
	"a,\"b\" ,c\n1, \"2\" ,3\n",
	"a,b\n\"1\n\",2\n",
	"a,b\n\" 1.5 \",\"\"\n",
	"a,b\n1,\"2\"x\n",
	"a,b\n1,\"2\n3,4\n",
	"a,b\n\"\",\"\"\"\"\n",
	"a\"b;c\n1;2\n3;4\n",
	"a\"b;c\n1;\"2\n3;4\n",
	"\"a;b\n1;2\n",
	"x\t y ;z\n1\t2\n",
	" a , b \n 1 , 2 \n",
	"a\tb\n 1 \t 2 \n",
	"1,2,3\n10,20,30\n",
	"1.5,2.5\n3,4\n",
	"a,b\nInf,1e400\n-Inf,2\n",
	"a\n1e-400\n",
	"a,b\nNaN,n/a\nNA,nan\n,NAN\n",
	"a,b\n0x1p-2,1_0\n",
	"a,b\n+.5,-5.\n",
	"a,a\n1,2\n",
	"a, a \n1,2\n",
	"a,b\n1,2\nr\xe9gion,3\n",
	"a,b\n1,2\n\xff\n",
	"\xff\xfea\x00",
	"\xfe\xff\x00a",
	"a,b\n1,peak\n",
	"a,b\n1,2\n3,4,5,6,7\n",
	"a\u00a0,b\n1\u00a0,\u00852\n",
	"a,\"\"\n1,2\n",
	"a,b\n1,2,\"\"\n",
	"a\n1\n\"\"\n2\n",
	"a\n1\n \"\" \n2\n",
	"a\n1\n\"\"\n",
	"a,b\n1,2\n\"\"\n3,4\n",
}

// sameResult asserts that the streaming reader and the whole-text reader
// agree about data: the same table, or the same error. When the text holds
// bytes that are not UTF-8, or is compressed, they need only agree on
// whether it is read: the stream reports the first problem in file order.
func sameResult(t *testing.T, data []byte, got, want *Numeric, gotErr, wantErr error) {
	t.Helper()
	exact := utf8.Valid(data) && !bytes.HasPrefix(data, []byte(gzipMagic))
	switch {
	case gotErr != nil && wantErr != nil:
		var ie *InputError
		if !errors.As(gotErr, &ie) {
			t.Fatalf("error %T %v is not an *InputError", gotErr, gotErr)
		}
		if exact && gotErr.Error() != wantErr.Error() {
			t.Fatalf("input %q:\nstream error %v\nwhole-text error %v", data, gotErr, wantErr)
		}
	case gotErr != nil || wantErr != nil:
		t.Fatalf("input %q: stream error %v; whole-text error %v", data, gotErr, wantErr)
	default:
		if strings.Join(got.Names, "\x00") != strings.Join(want.Names, "\x00") || len(got.Names) != len(want.Names) {
			t.Fatalf("input %q: names %q; whole text gives %q", data, got.Names, want.Names)
		}
		if len(got.Cols) != len(want.Cols) {
			t.Fatalf("input %q: %d columns; whole text gives %d", data, len(got.Cols), len(want.Cols))
		}
		for j := range want.Cols {
			if !sameFloats(got.Cols[j], want.Cols[j]) {
				t.Fatalf("input %q: column %d = %v; whole text gives %v", data, j, got.Cols[j], want.Cols[j])
			}
			for i, v := range want.Cols[j] {
				if math.Signbit(got.Cols[j][i]) != math.Signbit(v) {
					t.Fatalf("input %q: cell (%d, %d) = %v; whole text gives %v", data, i, j, got.Cols[j][i], v)
				}
			}
		}
	}
}

// tinyBuffers makes the line buffer as small as it can be for the test, so
// every refill, move and growth of the buffer is exercised.
func tinyBuffers(t testing.TB) {
	fb, mr := firstBuffer, minRead
	firstBuffer, minRead = 1, 1
	t.Cleanup(func() { firstBuffer, minRead = fb, mr })
}

// readers are ways of handing the same bytes to ParseNumeric.
var readers = []struct {
	name string
	wrap func([]byte) io.Reader
	tiny bool
}{
	{"bytes", func(b []byte) io.Reader { return bytes.NewReader(b) }, false},
	{"one byte at a time", func(b []byte) io.Reader { return iotest.OneByteReader(bytes.NewReader(b)) }, false},
	{"tiny buffer", func(b []byte) io.Reader { return bytes.NewReader(b) }, true},
	{"tiny buffer, half reads", func(b []byte) io.Reader { return iotest.HalfReader(bytes.NewReader(b)) }, true},
	{"no size", func(b []byte) io.Reader { return io.MultiReader(bytes.NewReader(b)) }, false},
}

var optionSets = []NumericOptions{{}, {AllowMissing: true}, {NonFiniteAsMissing: true, MissingHint: "a hint"}}

func TestStreamAgreesWithWholeText(t *testing.T) {
	for _, rd := range readers {
		t.Run(rd.name, func(t *testing.T) {
			if rd.tiny {
				tinyBuffers(t)
			}
			for _, c := range streamCases {
				for _, opt := range optionSets {
					got, gotErr := ParseNumeric("s.csv", rd.wrap([]byte(c)), opt)
					want, wantErr := parseNumericWhole("s.csv", strings.NewReader(c), opt)
					sameResult(t, []byte(c), got, want, gotErr, wantErr)
				}
			}
		})
	}
}

// The tables of the repository, among them the bad-input corpus (a 10 MB
// line, decimal commas, bytes that are not UTF-8), read as files.
func TestReadNumericRepositoryFilesAgree(t *testing.T) {
	var paths []string
	for _, pat := range []string{"../testdata/roi/*.csv*", "../testdata/bad/*/*signals*", "../testdata/bad/*/*confounds*"} {
		m, err := filepath.Glob(pat)
		if err != nil {
			t.Fatal(err)
		}
		paths = append(paths, m...)
	}
	if len(paths) < 10 {
		t.Fatalf("found only %d tables: %q", len(paths), paths)
	}
	for _, p := range paths {
		data, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		opts := optionSets
		if len(data) > 1<<20 {
			opts = opts[:1] // the 10 MB line: once is enough
		}
		for _, opt := range opts {
			got, gotErr := ReadNumeric(p, opt)
			want, wantErr := parseNumericWhole(p, bytes.NewReader(data), opt)
			sameResult(t, data, got, want, gotErr, wantErr)
		}
	}
	// The 10 MB line keeps its message.
	p := "../testdata/bad/huge-line-signals/sub01_signals.csv"
	_, err := ReadNumeric(p, NumericOptions{})
	checkInputError(t, err, p, 4, 0, "found 4 cells", "expected 3 cells")
}

// FuzzNumericStream compares the streaming reader with the whole-text one,
// with the smallest buffers (every refill exercised) and with one-byte reads.
func FuzzNumericStream(f *testing.F) {
	for _, c := range streamCases {
		f.Add([]byte(c), uint8(0))
	}
	f.Fuzz(func(t *testing.T, data []byte, mode uint8) {
		opt := optionSets[int(mode)%len(optionSets)]
		want, wantErr := parseNumericWhole("f.csv", bytes.NewReader(data), opt)
		got, gotErr := ParseNumeric("f.csv", bytes.NewReader(data), opt)
		sameResult(t, data, got, want, gotErr, wantErr)
		tinyBuffers(t)
		got, gotErr = ParseNumeric("f.csv", iotest.OneByteReader(bytes.NewReader(data)), opt)
		sameResult(t, data, got, want, gotErr, wantErr)
	})
}

// wideTable writes a table of m columns and rows rows, whose cell (t, j) is
// cellValue(t, j), and returns its text.
func wideTable(m, rows int, cellValue func(t, j int) string) []byte {
	var b bytes.Buffer
	for j := 0; j < m; j++ {
		if j > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, "region_%d", j)
	}
	b.WriteByte('\n')
	for t := 0; t < rows; t++ {
		for j := 0; j < m; j++ {
			if j > 0 {
				b.WriteByte(',')
			}
			b.WriteString(cellValue(t, j))
		}
		b.WriteByte('\n')
	}
	return b.Bytes()
}

func signalValue(t, j int) string {
	return strconv.FormatFloat(1000+float64((t*7919+j*104729)%100000)/1000, 'f', -1, 64)
}

func checkWide(t *testing.T, n *Numeric, m, rows int, cellValue func(t, j int) string) {
	t.Helper()
	if len(n.Names) != m || len(n.Cols) != m || n.Rows() != rows {
		t.Fatalf("%d names, %d columns, %d rows; want %d, %d, %d", len(n.Names), len(n.Cols), n.Rows(), m, m, rows)
	}
	for j, c := range n.Cols {
		if n.Names[j] != "region_"+strconv.Itoa(j) {
			t.Fatalf("name %d = %q", j, n.Names[j])
		}
		if len(c) != rows || cap(c) != rows {
			t.Fatalf("column %d: length %d, capacity %d; want %d", j, len(c), cap(c), rows)
		}
		for i, v := range c {
			want, _ := strconv.ParseFloat(cellValue(i, j), 64)
			if v != want {
				t.Fatalf("cell (%d, %d) = %v; want %v", i, j, v, want)
			}
		}
	}
}

func TestReadNumericWide(t *testing.T) {
	const m, rows = 20000, 50
	data := wideTable(m, rows, signalValue)
	dir := t.TempDir()
	plain := filepath.Join(dir, "signals.csv")
	if err := os.WriteFile(plain, data, 0o644); err != nil {
		t.Fatal(err)
	}
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write(data)
	zw.Close()
	zipped := filepath.Join(dir, "signals.csv.gz")
	if err := os.WriteFile(zipped, gz.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, p := range []string{plain, zipped} {
		t.Run(filepath.Base(p), func(t *testing.T) {
			n, err := ReadNumeric(p, NumericOptions{})
			if err != nil {
				t.Fatal(err)
			}
			checkWide(t, n, m, rows, signalValue)
		})
	}
	t.Run("from a reader of unknown length", func(t *testing.T) {
		n, err := ParseNumeric("signals.csv", io.MultiReader(bytes.NewReader(data)), NumericOptions{})
		if err != nil {
			t.Fatal(err)
		}
		checkWide(t, n, m, rows, signalValue)
	})
}

// Whatever the lengths of the first rows, whose length guesses the number
// of rows, a file reads the same.
func TestReadNumericRowGuess(t *testing.T) {
	cases := []struct {
		name  string
		value func(t, j int) string
	}{
		{"first rows long", func(t, j int) string {
			if t < 300 {
				return "1234.5678901234"
			}
			return strconv.Itoa(t % 10)
		}},
		{"first rows short", func(t, j int) string {
			if t < 300 {
				return strconv.Itoa(t % 10)
			}
			return "1234.5678901234"
		}},
		{"even", signalValue},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			const m, rows = 40, 3000
			p := filepath.Join(t.TempDir(), "s.csv")
			if err := os.WriteFile(p, wideTable(m, rows, c.value), 0o644); err != nil {
				t.Fatal(err)
			}
			n, err := ReadNumeric(p, NumericOptions{})
			if err != nil {
				t.Fatal(err)
			}
			checkWide(t, n, m, rows, c.value)
			// Appending to a column must not write into the next one.
			next := append([]float64(nil), n.Cols[1]...)
			for i := 0; i < rows/2; i++ {
				n.Cols[0] = append(n.Cols[0], -1)
			}
			if !sameFloats(n.Cols[1], next) {
				t.Fatal("appending to column 0 changed column 1")
			}
		})
	}
}

func TestGuessRows(t *testing.T) {
	cases := []struct {
		size, headerEnd, done int64
		rows, want            int
	}{
		{50 + 100*1000, 50, 50 + 100*8, 8, 8 + 1001 + 1},       // 992 rows to come, and 1% (1001.92)
		{50 + 100*8, 50, 50 + 100*8, 8, 0},                     // nothing left: cannot tell
		{0, 50, 850, 8, 0},                                     // size unknown
		{10_000, 50, 40, 8, 0},                                 // nonsense: cannot tell
		{1_089_352_890, 688_890, 688_890 + 8*907_220, 8, 1212}, // the 100,000-region table: 1,200 rows, and 1%
	}
	for _, c := range cases {
		if got := guessRows(c.size, c.headerEnd, c.done, c.rows); got != c.want {
			t.Errorf("guessRows(%d, %d, %d, %d) = %d; want %d", c.size, c.headerEnd, c.done, c.rows, got, c.want)
		}
	}
}

// The column store grows when rows come beyond the guess and gives back
// room left by a guess too large.
func TestColStore(t *testing.T) {
	cases := []struct {
		name  string
		guess int // what expect says, whatever the rows so far
		rows  int
	}{
		{"guess right", 1000, 1000},
		{"guess too small", 100, 1000},
		{"guess far too large", 100_000, 1000},
		{"no guess", 0, 1000},
		{"fewer rows than a block", 0, 3},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			const m = 300
			s := newColStore(m, func(int) int { return c.guess })
			for i := 0; i < c.rows; i++ {
				row := s.row()
				for j := range row {
					row[j] = float64(i*m + j)
				}
				s.commit()
			}
			cols := s.columns()
			if s.stride < c.rows || s.stride > c.rows+c.rows/16 {
				t.Errorf("stride %d for %d rows", s.stride, c.rows)
			}
			if len(s.back) != m*s.stride {
				t.Errorf("backing of %d values for %d columns of stride %d", len(s.back), m, s.stride)
			}
			for j, col := range cols {
				if len(col) != c.rows || cap(col) != c.rows {
					t.Fatalf("column %d: length %d, capacity %d; want %d", j, len(col), cap(col), c.rows)
				}
				for i, v := range col {
					if v != float64(i*m+j) {
						t.Fatalf("cell (%d, %d) = %v; want %d", i, j, v, i*m+j)
					}
				}
			}
		})
	}
}

// Reading allocates per table, not per cell or per row.
func TestParseNumericAllocations(t *testing.T) {
	allocs := func(rows int) float64 {
		data := wideTable(100, rows, signalValue)
		return testing.AllocsPerRun(5, func() {
			if _, err := ParseNumeric("s.csv", bytes.NewReader(data), NumericOptions{}); err != nil {
				t.Fatal(err)
			}
		})
	}
	few, many := allocs(10), allocs(2000) // 1,000 and 200,000 cells
	if many > 150 || many > few+20 {
		t.Errorf("%v allocations for 2,000 rows of 100 cells, %v for 10 rows; want about as few", many, few)
	}
}

// A read error in the middle of the text is reported as the file's.
func TestParseNumericReadError(t *testing.T) {
	data := wideTable(3, 100, signalValue)
	r := io.MultiReader(bytes.NewReader(data[:len(data)/2]), iotest.ErrReader(errors.New("device gone")))
	_, err := ParseNumeric("s.csv", r, NumericOptions{})
	checkInputError(t, err, "s.csv", 0, 0, "could not be read (device gone)", "a complete, readable file")
}

func BenchmarkReadNumericLarge(b *testing.B) {
	const m, rows = 2000, 600
	p := filepath.Join(b.TempDir(), "signals.csv")
	data := wideTable(m, rows, signalValue)
	if err := os.WriteFile(p, data, 0o644); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := ReadNumeric(p, NumericOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}

package roi

import (
	"bytes"
	"compress/gzip"
	"math"
	"os"
	"strings"
	"testing"
)

func TestParseNumericRefuses(t *testing.T) {
	cases := []badCase{
		{"ragged row", "a,b,c\n1,2,3\n4,5\n", 3, 0, []string{"found 2 cells", "expected 3 cells"}},
		{"too many cells", "a,b\n1,2\n3,4,5,6,7\n", 3, 0, []string{"found 5 cells", "expected 2 cells"}},
		{"non-numeric cell", "a,b,c,ridge_a\n1,2,3,4\n1,2,3,12..5\n", 3, 4,
			[]string{`"12..5" is not a number (column "ridge_a"); expected a number with a decimal point`}},
		{"word in a cell", "a\tb\n1\tpeak\n", 2, 2, []string{`"peak" is not a number`, `column "b"`}},
		// Go's syntax for numbers, which strconv accepts, is not a table's.
		{"region named NA", "amyg,NA\n1,2\n", 1, 2, []string{`column 2 is named "NA", which tables read as a missing value`}},
		{"digit separator", "a,b\n1,1_000\n", 2, 2, []string{`"1_000" is not a number`}},
		{"hexadecimal float", "a,b\n0x1p10,1\n", 2, 1, []string{`"0x1p10" is not a number`}},
		{"hexadecimal float, negative", "a,b\n1,-0X1.8P3\n", 2, 2, []string{`"-0X1.8P3" is not a number`}},
		{"duplicate region name", "amyg,hipp,amyg\n1,2,3\n", 1, 3, []string{`column 3 is named "amyg", like column 1`}},
		{"duplicate after trimming spaces", "amyg, amyg \n1,2\n", 1, 2, []string{`column 2 is named "amyg"`}},
		{"empty region name", "a,,c\n1,2,3\n", 1, 2, []string{"column 2 of the header has no name"}},
		{"region name of spaces", "a,   ,c\n1,2,3\n", 1, 2, []string{"column 2 of the header has no name"}},
		{"trailing delimiter in a row", "a,b\n1,2\n3,4,\n", 3, 0,
			[]string{"found 3 cells", "ends with a comma", "expected 2 cells"}},
		{"trailing delimiter in the header", "a\tb\t\n1\t2\t\n", 1, 3, []string{"header line ends with a tab"}},
		{"header only", "a,b\n", 1, 0, []string{"a header and no rows"}},
		{"empty file", "", 0, 0, []string{"the file is empty"}},
		{"only line ends", "\r\n\n\n", 0, 0, []string{"the file is empty"}},
		{"Inf", "a,b\n1,2\n3,Inf\n", 3, 2, []string{`"Inf" is not a finite number`, "expected a finite number"}},
		{"-Inf", "a\n1\n-Inf\n", 3, 1, []string{`"-Inf" is not a finite number`}},
		{"infinity spelled out", "a\n+infinity\n", 2, 1, []string{`"+infinity" is not a finite number`}},
		{"overflow to Inf", "a,b\n1,1e400\n", 2, 2, []string{`"1e400" is too large`, "overflows"}},
		{"NaN cell", "a,b\n1,2\nNaN,3\n", 3, 1, []string{`missing value "NaN"`, `column "a"`}},
		{"n/a cell", "a,b\nn/a,3\n", 2, 1, []string{`missing value "n/a"`}},
		{"NA cell", "a,b\n1,NA\n", 2, 2, []string{`missing value "NA"`}},
		{"empty cell", "a,b,c\n1,,3\n", 2, 2, []string{"empty cell", `column "b"`}},
		{"empty line in a one-column table", "a\n1\n\n2\n", 3, 1, []string{"empty cell"}},
		{"empty line between rows", "a,b\n1,2\n\n3,4\n", 3, 0, []string{"an empty line", "expected 2 cells"}},
		{"decimal commas, semicolon file", "ridge_a;ridge_b\n12,5;13,25\n", 2, 1,
			[]string{`"12,5" is written with a decimal comma`, "uses decimal commas", "decimal point"}},
		{"decimal commas, tab file", "a\tb\n1.5\t-0,25\n", 2, 2, []string{`"-0,25"`, "decimal comma"}},
		{"decimal commas, one column read as comma file", "ridge_a\n12,5\n13,0\n", 2, 0,
			[]string{"found 2 cells", "decimal commas", "decimal point"}},
		{"decimal commas split in a comma file", "a,b\n12,5,13,75\n", 2, 0, []string{"split at decimal commas", "decimal point"}},
		{"quoted decimal comma", "a,b\n\"12,5\",1\n", 2, 1, []string{"decimal comma"}},
		{"invalid UTF-8", "a,b\n1,2\nr\xe9gion,3\n", 3, 0, []string{"0xE9", "not UTF-8", `"r"`}},
		{"UTF-16 text", "\xff\xfea\x00,\x00b\x00\n\x00", 1, 0, []string{"UTF-16"}},
		{"quote never closed", "a,\"b\n1,2\n", 1, 2, []string{"never closed"}},
		{"text after a closing quote", "a,\"b\"x\n1,2\n", 1, 2, []string{`text "x" right after the closing quote`}},
		{"numbers where the header should be", "1.5,2.5\n3,4\n", 1, 0, []string{"holds numbers, not column names"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseNumeric("signals.csv", strings.NewReader(c.input), NumericOptions{})
			checkInputError(t, err, "signals.csv", c.line, c.col, c.frags...)
		})
	}
}

func TestParseNumericReads(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		name  string
		input string
		opt   NumericOptions
		names []string
		cols  [][]float64
	}{
		{"comma", "a,b\n1,2\n3.5,-4e-1\n", NumericOptions{}, []string{"a", "b"}, [][]float64{{1, 3.5}, {2, -0.4}}},
		{"tab with spaces around cells", "a\t b \n 1 \t2\n", NumericOptions{}, []string{"a", "b"}, [][]float64{{1}, {2}}},
		{"semicolon with quoted header", "\"x;1\";y\n1;2\n", NumericOptions{}, []string{"x;1", "y"}, [][]float64{{1}, {2}}},
		{"quoted cells", "a,b\n\"1.5\",\" 2\"\n", NumericOptions{}, []string{"a", "b"}, [][]float64{{1.5}, {2}}},
		{"integer region labels", "1,2,3\n10,20,30\n", NumericOptions{}, []string{"1", "2", "3"}, [][]float64{{10}, {20}, {30}}},
		{"lone CR line ends", "a,b\r1,2\r3,4\r", NumericOptions{}, []string{"a", "b"}, [][]float64{{1, 3}, {2, 4}}},
		{"blank lines at the ends ignored", "\n\na,b\n1,2\n\n\n", NumericOptions{}, []string{"a", "b"}, [][]float64{{1}, {2}}},
		{"no final line end", "a,b\n1,2", NumericOptions{}, []string{"a", "b"}, [][]float64{{1}, {2}}},
		{"underflow reads as zero", "a\n1e-400\n", NumericOptions{}, []string{"a"}, [][]float64{{0}}},
		{"missing cells allowed", "a,b,c\nNaN,n/a,NA\n,nan,1\n", NumericOptions{AllowMissing: true},
			[]string{"a", "b", "c"}, [][]float64{{nan, nan}, {nan, nan}, {nan, 1}}},
		{"empty line in a one-column table, missing allowed", "a\n1\n\n2\n", NumericOptions{AllowMissing: true},
			[]string{"a"}, [][]float64{{1, nan, 2}}},
		{"non-finite as missing", "a,b\nInf,1e400\n-Inf,2\n", NumericOptions{NonFiniteAsMissing: true},
			[]string{"a", "b"}, [][]float64{{nan, nan}, {nan, 2}}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			n, err := ParseNumeric("signals.csv", strings.NewReader(c.input), c.opt)
			if err != nil {
				t.Fatal(err)
			}
			if n.Path != "signals.csv" {
				t.Errorf("Path = %q", n.Path)
			}
			checkNumeric(t, n, c.names, c.cols)
		})
	}
}

// The missing-value hint is part of the message, so a caller can say how
// to allow missing values; and allowing missing values does not allow Inf.
func TestParseNumericOptionsKeepApart(t *testing.T) {
	_, err := ParseNumeric("s.csv", strings.NewReader("a\nNA\n"), NumericOptions{MissingHint: "use --missing censor"})
	checkInputError(t, err, "s.csv", 2, 1, `missing value "NA"`, "use --missing censor")
	_, err = ParseNumeric("s.csv", strings.NewReader("a\n1\nInf\n"), NumericOptions{AllowMissing: true})
	checkInputError(t, err, "s.csv", 3, 1, "not a finite number")
	_, err = ParseNumeric("s.csv", strings.NewReader("a\n1\nn/a\n"), NumericOptions{NonFiniteAsMissing: true})
	checkInputError(t, err, "s.csv", 3, 1, `missing value "n/a"`)
}

func TestReadNumericFilesAgree(t *testing.T) {
	clean, err := ReadNumeric("../testdata/roi/signals_clean.csv", NumericOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if clean.Rows() != 12 || len(clean.Names) != 3 || clean.Names[2] != "pole, c" {
		t.Fatalf("clean table: %d rows, names %q; want 12 rows, 3 names ending in \"pole, c\"", clean.Rows(), clean.Names)
	}
	if got := clean.Column("ridge_b")[11]; got != 844.75 {
		t.Errorf("ridge_b at volume 11 = %v; want 844.75", got)
	}
	for _, path := range []string{"../testdata/roi/signals_bom_crlf.csv", "../testdata/roi/signals_clean.csv.gz"} {
		t.Run(path, func(t *testing.T) {
			n, err := ReadNumeric(path, NumericOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if n.Path != path {
				t.Errorf("Path = %q; want %q", n.Path, path)
			}
			checkNumeric(t, n, clean.Names, clean.Cols)
		})
	}
}

func TestReadNumericFileProblems(t *testing.T) {
	dir := t.TempDir()
	plain := dir + "/plain.csv.gz"
	if err := os.WriteFile(plain, []byte("a\n1\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write([]byte("a\n1\n2\n3\n4\n5\n6\n7\n8\n9\n"))
	zw.Close()
	cut := dir + "/cut.csv.gz"
	if err := os.WriteFile(cut, gz.Bytes()[:gz.Len()-6], 0o644); err != nil {
		t.Fatal(err)
	}
	cases := []struct{ name, path, frag string }{
		{"missing file", dir + "/nothere.csv", "does not exist"},
		{"folder", dir, "is a folder"},
		{".gz name, plain content", plain, "not gzip-compressed"},
		{"truncated gzip", cut, "compressed data is damaged"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ReadNumeric(c.path, NumericOptions{})
			checkInputError(t, err, c.path, 0, 0, c.frag)
		})
	}
}

// Compressed bytes are recognised by their signature whatever the name.
func TestParseNumericGzipWithoutSuffix(t *testing.T) {
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write([]byte("\ufeffa;b\r\n1;2\r\n"))
	zw.Close()
	n, err := ParseNumeric("signals.csv", &gz, NumericOptions{})
	if err != nil {
		t.Fatal(err)
	}
	checkNumeric(t, n, []string{"a", "b"}, [][]float64{{1}, {2}})
}

func TestDetectDelimiter(t *testing.T) {
	cases := []struct {
		name, header string
		want         byte
	}{
		{"comma", "a,b,c", ','},
		{"tab", "a\tb\tc", '\t'},
		{"semicolon", "a;b;c", ';'},
		{"most frequent wins", "a;b;c,d", ';'},
		{"tie with comma goes to comma", "a,b;c", ','},
		{"tie of tab and semicolon goes to tab", "a\tb;c", '\t'},
		{"quoted delimiters do not count", "\"a;b;c\",d", ','},
		{"one column", "region", ','},
		{"only the header line counts", "a;b\n1,2,3,4", ';'},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if got := detectDelimiter(c.header); got != c.want {
				t.Errorf("detectDelimiter(%q) = %q; want %q", c.header, got, c.want)
			}
		})
	}
}

func TestFormatLines(t *testing.T) {
	cases := []struct {
		lines []int
		want  string
	}{
		{[]int{4}, "line 4"},
		{[]int{4, 9}, "lines 4, 9"},
		{[]int{4, 5}, "lines 4, 5"},
		{[]int{7, 8, 9, 15, 20, 21, 22, 23}, "lines 7-9, 15, 20-23"},
	}
	for _, c := range cases {
		if got := formatLines(c.lines); got != c.want {
			t.Errorf("formatLines(%v) = %q; want %q", c.lines, got, c.want)
		}
	}
}

func BenchmarkParseNumeric(b *testing.B) {
	var sb strings.Builder
	const regions, volumes = 400, 600
	for j := 0; j < regions; j++ {
		if j > 0 {
			sb.WriteByte(',')
		}
		sb.WriteString("region_")
		sb.WriteString(strings.Repeat("x", j%7))
		sb.WriteString(string(rune('a' + j%26)))
		sb.WriteString(strings.Repeat("0", j/26))
	}
	sb.WriteByte('\n')
	for t := 0; t < volumes; t++ {
		for j := 0; j < regions; j++ {
			if j > 0 {
				sb.WriteByte(',')
			}
			sb.WriteString("1034.5671")
		}
		sb.WriteByte('\n')
	}
	text := sb.String()
	b.SetBytes(int64(len(text)))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := ParseNumeric("bench.csv", strings.NewReader(text), NumericOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}

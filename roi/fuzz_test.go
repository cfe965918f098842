package roi

import (
	"bytes"
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
)

// countDataRows counts the rows a successful ParseNumeric must have read,
// by a simpler rule than the reader's: the lines after the header, less
// blank lines before the header and at the end. It is used only on text
// without quotes, where every record is one line.
func countDataRows(text string) int {
	text = strings.TrimPrefix(text, utf8BOM)
	text = strings.ReplaceAll(text, "\r\n", "\n")
	text = strings.ReplaceAll(text, "\r", "\n")
	lines := strings.Split(strings.Trim(text, "\n"), "\n")
	blank := " "
	if !strings.Contains(lines[0], "\t") {
		blank = " \t" // tabs are spaces unless the header has one
	}
	for len(lines) > 1 && strings.Trim(lines[len(lines)-1], blank) == "" {
		lines = lines[:len(lines)-1]
	}
	return len(lines) - 1
}

func FuzzParseNumeric(f *testing.F) {
	seeds := []string{
		"a,b\n1,2\n3,4\n",
		"\ufeffa;b\r\n1;2\r\n",
		"a\tb\n1\tn/a\n",
		"\"x,y\",z\n1,2\n",
		"a\n1\n\n2\n",
		"a,b\n1,2,\n",
		"a,b\n12,5,3\n",
		"a,\"b\n",
		"a\n1e400\n",
		"",
		"\x1f\x8b\x08\x00",
	}
	for _, s := range seeds {
		f.Add([]byte(s), false)
		f.Add([]byte(s), true)
	}
	f.Fuzz(func(t *testing.T, data []byte, allow bool) {
		n, err := ParseNumeric("fuzz.csv", bytes.NewReader(data), NumericOptions{AllowMissing: allow})
		if err != nil {
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("error %T %v is not an *InputError", err, err)
			}
			return
		}
		if len(n.Names) == 0 || len(n.Cols) != len(n.Names) {
			t.Fatalf("%d names, %d columns", len(n.Names), len(n.Cols))
		}
		rows := n.Rows()
		if rows == 0 {
			t.Fatal("nil error with no rows")
		}
		for j, c := range n.Cols {
			if len(c) != rows {
				t.Fatalf("column %d has %d values; the table has %d rows", j, len(c), rows)
			}
			for _, v := range c {
				if math.IsInf(v, 0) || (math.IsNaN(v) && !allow) {
					t.Fatalf("column %d holds %v", j, v)
				}
			}
		}
		text := string(data)
		if !bytes.HasPrefix(data, []byte(gzipMagic)) && !strings.ContainsRune(text, '"') {
			if want := countDataRows(text); rows != want {
				t.Fatalf("%d rows read; the text has %d lines after the header", rows, want)
			}
		}
		checkNoShift(t, text, n)
	})
}

// checkNoShift compares every cell with a plain split of the text, for
// simple comma tables (no quotes, BOM, CR, tab, semicolon or blank line),
// so a reader that moved a value to another column or row would fail.
func checkNoShift(t *testing.T, text string, n *Numeric) {
	if strings.ContainsAny(text, "\"\r\t;\ufeff") || strings.Contains(text, "\n\n") || strings.HasPrefix(text, "\n") {
		return
	}
	lines := strings.Split(strings.TrimSuffix(text, "\n"), "\n")
	if len(lines)-1 != n.Rows() {
		return
	}
	for i, line := range lines[1:] {
		cells := strings.Split(line, ",")
		if len(cells) != len(n.Cols) {
			t.Fatalf("line %d has %d cells; the table has %d columns", i+2, len(cells), len(n.Cols))
		}
		for j, c := range cells {
			c = strings.TrimSpace(c)
			v, err := strconv.ParseFloat(c, 64)
			got := n.Cols[j][i]
			if err != nil {
				if !math.IsNaN(got) {
					t.Fatalf("cell %d:%d %q read as %v", i+2, j+1, c, got)
				}
				continue
			}
			if got != v && !(math.IsNaN(got) && math.IsNaN(v)) {
				t.Fatalf("cell %d:%d %q read as %v", i+2, j+1, c, got)
			}
		}
	}
}

// FuzzParseConfounds reads confounds tables, which allow missing cells.
func FuzzParseConfounds(f *testing.F) {
	f.Add([]byte("tx,ty,tz,rx,ry,rz,fd\n0,0,0,0,0,0,n/a\n0.1,0,0,0.001,0,0,0.15\n"))
	f.Add([]byte("a\tb\nNA\t1\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		n, err := ParseNumeric("confounds.tsv", bytes.NewReader(data), NumericOptions{AllowMissing: true})
		if err != nil {
			var ie *InputError
			if !errors.As(err, &ie) || ie.File != "confounds.tsv" {
				t.Fatalf("error %T %v is not an *InputError naming the file", err, err)
			}
			return
		}
		for j, c := range n.Cols {
			if len(c) != n.Rows() {
				t.Fatalf("column %d has %d values for %d rows", j, len(c), n.Rows())
			}
		}
		checkNoShift(t, string(data), n)
	})
}

// FuzzParseStudy reads study tables: a valid one has every required field
// and no repeated run.
func FuzzParseStudy(f *testing.F) {
	f.Add([]byte("subject,run,tr,signals\n01,1,2,s.csv\n"))
	f.Add([]byte("subject\tsession\trun\ttr\tsignals\tevents\n01\tpre\t1\t0.8\ta.csv\tn/a\n"))
	f.Add([]byte("subject;run;tr;signals\n01;1;2000;s.csv\n01;1;2;s.csv\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		st, err := ParseStudy("study.csv", bytes.NewReader(data))
		if err != nil {
			var ie *InputError
			if !errors.As(err, &ie) || ie.File != "study.csv" {
				t.Fatalf("error %T %v is not an *InputError naming the file", err, err)
			}
			return
		}
		seen := map[string]bool{}
		for _, r := range st.Runs {
			if r.Subject == "" || r.Run == "" || r.Signals == "" || !(r.TR > 0 && r.TR <= 20) || r.Line < 2 {
				t.Fatalf("invalid run accepted: %+v", r)
			}
			k := r.Subject + "\x00" + r.Session + "\x00" + r.Run
			if seen[k] {
				t.Fatalf("repeated run accepted: %+v", r)
			}
			seen[k] = true
		}
	})
}

func FuzzParseEvents(f *testing.F) {
	seeds := []string{
		"onset\tduration\ttrial_type\n0\t1\tgo\n2\t1\tn/a\n",
		"onset,duration,condition,amplitude\n1,2,a,0.5\n",
		"condition;onset;duration\nx;1;0\n",
		"onset,duration,condition\n1,-1,a\n",
		"onset,duration,condition,note\n1,2,a,\"x\ny\"\n",
		"onset,duration\n",
		"",
	}
	for _, s := range seeds {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		ev, err := ParseEvents("fuzz.tsv", bytes.NewReader(data))
		if err != nil {
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("error %T %v is not an *InputError", err, err)
			}
			return
		}
		prev := 0
		for _, e := range ev.Events {
			if e.Line <= prev {
				t.Fatalf("event on line %d after one on line %d", e.Line, prev)
			}
			prev = e.Line
			if math.IsNaN(e.Onset) || math.IsInf(e.Onset, 0) || !(e.Duration >= 0) || math.IsInf(e.Duration, 0) ||
				math.IsNaN(e.Amplitude) || math.IsInf(e.Amplitude, 0) || isMissing(e.Condition) {
				t.Fatalf("event %+v is not valid", e)
			}
			if len(e.Extra)+3 > len(ev.Columns) {
				t.Fatalf("event has %d extra columns of %d", len(e.Extra), len(ev.Columns))
			}
		}
	})
}

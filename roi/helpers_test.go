package roi

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// badCase is an input that must be refused with an *InputError at a known
// place whose message holds the given fragments.
type badCase struct {
	name  string
	input string
	line  int      // want InputError.Line
	col   int      // want InputError.Column
	frags []string // fragments the message must contain
}

// checkInputError asserts that err is an *InputError naming file at line
// and column and holding every fragment.
func checkInputError(t *testing.T, err error, file string, line, col int, frags ...string) {
	t.Helper()
	if err == nil {
		t.Fatalf("got no error; want an *InputError at %s:%d:%d", file, line, col)
	}
	var ie *InputError
	if !errors.As(err, &ie) {
		t.Fatalf("got %T (%v); want *InputError", err, err)
	}
	msg := err.Error()
	if ie.File != file {
		t.Errorf("File = %q; want %q (message %q)", ie.File, file, msg)
	}
	if !strings.HasPrefix(msg, file) {
		t.Errorf("message %q does not start with the file name %q", msg, file)
	}
	if ie.Line != line || ie.Column != col {
		t.Errorf("at line %d column %d; want line %d column %d (message %q)", ie.Line, ie.Column, line, col, msg)
	}
	for _, f := range frags {
		if !strings.Contains(msg, f) {
			t.Errorf("message %q does not contain %q", msg, f)
		}
	}
}

// sameFloats compares two columns, NaN equal to NaN.
func sameFloats(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] && !(math.IsNaN(a[i]) && math.IsNaN(b[i])) {
			return false
		}
	}
	return true
}

// checkNumeric asserts that n has the given names and columns.
func checkNumeric(t *testing.T, n *Numeric, names []string, cols [][]float64) {
	t.Helper()
	if strings.Join(n.Names, "|") != strings.Join(names, "|") || len(n.Names) != len(names) {
		t.Fatalf("Names = %q; want %q", n.Names, names)
	}
	if len(n.Cols) != len(cols) {
		t.Fatalf("%d columns; want %d", len(n.Cols), len(cols))
	}
	for j := range cols {
		if !sameFloats(n.Cols[j], cols[j]) {
			t.Errorf("column %q = %v; want %v", names[j], n.Cols[j], cols[j])
		}
	}
}

// writeFiles writes files (relative name → content) under dir.
func writeFiles(t *testing.T, dir string, files map[string]string) {
	t.Helper()
	for name, content := range files {
		p := filepath.Join(dir, name)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

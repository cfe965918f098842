package report

import (
	"math"
	"os"
	"path/filepath"
	"testing"
)

// TestOutputAtomic: nothing appears under a final name before Commit, and
// Abort leaves no file at all.
func TestOutputAtomic(t *testing.T) {
	dir := t.TempDir()
	o, err := NewOutput(dir)
	if err != nil {
		t.Fatal(err)
	}
	f, err := o.Create("design/a.csv")
	if err != nil {
		t.Fatal(err)
	}
	f.WriteString("x\n1\n")
	if _, err := os.Stat(filepath.Join(dir, "design", "a.csv")); !os.IsNotExist(err) {
		t.Fatalf("final file exists before Commit: %v", err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(dir, "design", "a.csv"))
	if err != nil || string(b) != "x\n1\n" {
		t.Fatalf("after Commit: %q, %v", b, err)
	}

	o2, _ := NewOutput(dir)
	g, _ := o2.Create("b.csv")
	g.WriteString("partial")
	o2.Abort()
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if e.Name() != "design" {
			t.Errorf("left behind after Abort: %s", e.Name())
		}
	}
}

func TestNumMissing(t *testing.T) {
	for _, v := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
		if Num(v) != "" {
			t.Errorf("Num(%g) = %q, want empty", v, Num(v))
		}
	}
}

// TestMarkdownNames: names with characters Markdown gives a meaning are
// escaped in report tables (a | in a region name had split its row into
// another column; <b> passed as HTML; *x* became emphasis), and ordinary
// names, region_002 among them, stay as they are. (Found by an adversarial
// sweep.)
func TestMarkdownNames(t *testing.T) {
	for in, want := range map[string]string{
		"region_002": "region_002",
		"a|b":        `a\|b`,
		"<b>x</b>":   `\<b\>x\</b\>`,
		"*em*":       `\*em\*`,
		"c:\\d`e`":   "c:\\\\d\\`e\\`",
		"[link]":     `\[link\]`,
	} {
		if got := mdText(in); got != want {
			t.Errorf("mdText(%q) = %q, want %q", in, got, want)
		}
	}
}

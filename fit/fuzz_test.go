package fit

import (
	"math"
	"strings"
	"testing"
)

// FuzzParseContrast: a contrast expression parses into distinct names with
// finite weights, or is refused with an error that quotes it; never a panic.
func FuzzParseContrast(f *testing.F) {
	for _, s := range []string{
		"order = ordered - jumbled", "0.5*ordered + 0.5*jumbled", `gain = "parametric gain" - 2 loss`,
		"a:time", "x = 2e3 a - b", "= a", "a +", "1e400 a", "a - - b", `"unclosed`, "a b", "3d - 2d",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		c, err := ParseContrast(s)
		if err != nil {
			if !strings.Contains(err.Error(), "contrast") {
				t.Fatalf("error %q does not say it is about the contrast", err)
			}
			return
		}
		if c.Name == "" || len(c.Names) == 0 || len(c.Names) != len(c.Weights) {
			t.Fatalf("parsed %q into %+v", s, c)
		}
		seen := map[string]bool{}
		for i, n := range c.Names {
			if n == "" || seen[n] {
				t.Fatalf("parsed %q: name %q empty or repeated", s, n)
			}
			seen[n] = true
			if math.IsNaN(c.Weights[i]) || math.IsInf(c.Weights[i], 0) {
				t.Fatalf("parsed %q: weight %v", s, c.Weights[i])
			}
		}
		if _, err := ParseFTest("f = " + c.Expr + "; " + c.Expr); err != nil {
			t.Fatalf("the parsed expression %q does not parse as an F test row: %v", c.Expr, err)
		}
	})
}

// TestQuotedNamesHoldSeparators: a quoted condition name may hold '=' and
// ';' (found by FuzzParseContrast: ';' split F test rows inside quotes).
func TestQuotedNamesHoldSeparators(t *testing.T) {
	c, err := ParseContrast(`"a=b;c" - d`)
	if err != nil || c.Names[0] != "a=b;c" || c.Names[1] != "d" {
		t.Fatalf("%+v, %v", c, err)
	}
	f, err := ParseFTest(`both = "x;y"; d`)
	if err != nil || len(f.Rows) != 2 || f.Rows[0].Names[0] != "x;y" {
		t.Fatalf("%+v, %v", f, err)
	}
}

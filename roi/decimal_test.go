package roi

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// checkDecimal asserts that parseDecimal, when it reads s, gives the bits
// strconv.ParseFloat gives.
func checkDecimal(t *testing.T, s string) bool {
	t.Helper()
	got, ok := parseDecimal([]byte(s))
	if !ok {
		return false
	}
	want, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("parseDecimal(%q) = %v; strconv refuses it: %v", s, got, err)
	}
	if math.Float64bits(got) != math.Float64bits(want) {
		t.Fatalf("parseDecimal(%q) = %v (%#x); strconv gives %v (%#x)", s, got, math.Float64bits(got), want, math.Float64bits(want))
	}
	return true
}

func TestParseDecimal(t *testing.T) {
	read := []string{"0", "-0", "+0", "-0.0", "0.0e5", "1034.5671", "-1034.5671", "+.5", "5.", ".5", "1e22",
		"1e-22", "9007199254740992", "900719925474099.2e1", "0.000123", "1.25E+03", "1.5e-005", "0000001.5",
		"0.1", "0.3", "123456789012345.6", "-3.14159265358979"}
	for _, s := range read {
		if !checkDecimal(t, s) {
			t.Errorf("parseDecimal(%q) left it to strconv", s)
		}
	}
	left := []string{"", ".", "-", "+", "e5", "1e", "1e+", "1.5.3", "1,5", "1_000", "0x1p-2", "Inf", "NaN",
		"1e23", "1e-23", "9007199254740993", "12345678901234567", "1e1000", " 1", "1 ", "--1", "1e5x", "1.5f"}
	for _, s := range left {
		if checkDecimal(t, s) {
			t.Errorf("parseDecimal(%q) read it; strconv should", s)
		}
	}
	// Random decimals in the forms tables hold.
	rng := rand.New(rand.NewPCG(1, 2))
	for range 200000 {
		var b strings.Builder
		if rng.IntN(3) == 0 {
			b.WriteByte('-')
		}
		digits := strconv.FormatUint(rng.Uint64N(1<<uint(rng.IntN(56))), 10)
		if p := rng.IntN(len(digits) + 1); rng.IntN(4) != 0 {
			digits = digits[:p] + "." + digits[p:]
		}
		b.WriteString(digits)
		if rng.IntN(3) == 0 {
			b.WriteString("e" + strconv.Itoa(rng.IntN(50)-25))
		}
		checkDecimal(t, b.String())
	}
}

func FuzzParseDecimal(f *testing.F) {
	for _, s := range []string{"1034.5671", "-0", "1e22", "9007199254740992", ".5e-3", "0.1"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) { checkDecimal(t, s) })
}

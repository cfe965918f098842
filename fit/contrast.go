package fit

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"unicode"
)

// Contrast is a named weighted sum of condition (or other term) estimates,
// c'β. Weights lists the names in the order they were written.
type Contrast struct {
	Name    string
	Expr    string
	Names   []string
	Weights []float64
}

// ParseContrast reads a --contrast value 'NAME = EXPR' (a bare EXPR is named
// after itself). EXPR is a weighted sum of names:
//
//	flash - hum        0.5*flash + 0.5*hum        2 flash - "slow tone"
//
// Names are letters, digits, '_', '.' and ':'; any other name is written in
// double quotes. A name written twice has its weights added.
func ParseContrast(s string) (Contrast, error) {
	name, expr := "", s
	if i := indexOutsideQuotes(s, '='); i >= 0 {
		name, expr = strings.TrimSpace(s[:i]), strings.TrimSpace(s[i+1:])
		if name == "" {
			return Contrast{}, fmt.Errorf("contrast %q: the name before '=' is empty", s)
		}
	} else {
		expr = strings.TrimSpace(s)
		name = expr
	}
	names, weights, err := parseWeightedSum(expr)
	if err != nil {
		return Contrast{}, fmt.Errorf("contrast %q: %v", s, err)
	}
	return Contrast{Name: name, Expr: expr, Names: names, Weights: weights}, nil
}

func isNameRune(r rune) bool {
	return unicode.IsLetter(r) || unicode.IsDigit(r) || r == '_' || r == '.' || r == ':'
}

func parseWeightedSum(expr string) ([]string, []float64, error) {
	rs := []rune(expr)
	pos := 0
	skip := func() {
		for pos < len(rs) && unicode.IsSpace(rs[pos]) {
			pos++
		}
	}
	var names []string
	var weights []float64
	index := map[string]int{}
	first := true
	for {
		skip()
		if pos >= len(rs) {
			if first {
				return nil, nil, fmt.Errorf("expected a weighted sum of condition names, found nothing")
			}
			break
		}
		sign := 1.0
		if rs[pos] == '+' || rs[pos] == '-' {
			if rs[pos] == '-' {
				sign = -1
			}
			pos++
			skip()
		} else if !first {
			return nil, nil, fmt.Errorf("expected '+' or '-' at character %d, found %q", pos+1, string(rs[pos]))
		}
		first = false
		weight := 1.0
		// An optional number, optionally followed by '*'.
		start := pos
		for pos < len(rs) && (unicode.IsDigit(rs[pos]) || rs[pos] == '.' || ((rs[pos] == 'e' || rs[pos] == 'E') && pos > start)) {
			pos++
		}
		if pos > start {
			num := string(rs[start:pos])
			v, err := strconv.ParseFloat(num, 64)
			if err != nil || math.IsInf(v, 0) {
				// Not a number after all: a name that starts with a digit.
				pos = start
			} else {
				skip()
				if pos < len(rs) && rs[pos] == '*' {
					pos++
					skip()
				}
				weight = v
			}
		}
		var name string
		switch {
		case pos < len(rs) && rs[pos] == '"':
			end := pos + 1
			for end < len(rs) && rs[end] != '"' {
				end++
			}
			if end >= len(rs) {
				return nil, nil, fmt.Errorf("a quoted name opened at character %d is not closed", pos+1)
			}
			name = string(rs[pos+1 : end])
			pos = end + 1
		default:
			s := pos
			for pos < len(rs) && isNameRune(rs[pos]) {
				pos++
			}
			name = string(rs[s:pos])
		}
		if name == "" {
			if pos < len(rs) {
				return nil, nil, fmt.Errorf("expected a condition name at character %d, found %q", pos+1, string(rs[pos]))
			}
			return nil, nil, fmt.Errorf("expected a condition name at the end")
		}
		if i, ok := index[name]; ok {
			weights[i] += sign * weight
		} else {
			index[name] = len(names)
			names = append(names, name)
			weights = append(weights, sign*weight)
		}
	}
	return names, weights, nil
}

// Check returns an error when the contrast names something that is not in
// known, listing the known names.
func (c Contrast) Check(known []string) error {
	set := map[string]bool{}
	for _, k := range known {
		set[k] = true
	}
	for _, n := range c.Names {
		if !set[n] {
			ks := append([]string(nil), known...)
			sort.Strings(ks)
			return fmt.Errorf("contrast %q names %q, which is not a condition or term of this study; known: %s", c.Name, n, strings.Join(ks, ", "))
		}
	}
	return nil
}

// Vector returns c over the design's terms, and false when the design lacks
// one of the names (the condition has no events in this run). A name is a
// term name (a condition's main term, CONDITION:time, CONDITION:COLUMN,
// CONDITION:bin:K); in an FIR model a bare condition name stands for the
// mean of its bins, the average response over the window.
func (c Contrast) Vector(d *Design) ([]float64, bool) {
	v := make([]float64, len(d.Terms))
	for i, n := range c.Names {
		if j := d.TermIndex(n); j >= 0 {
			v[j] += c.Weights[i]
			continue
		}
		var bins []int
		for _, j := range d.ConditionTerms(n) {
			if d.Terms[j].Kind == TermFIR {
				bins = append(bins, j)
			}
		}
		if len(bins) == 0 {
			return nil, false
		}
		for _, j := range bins {
			v[j] += c.Weights[i] / float64(len(bins))
		}
	}
	return v, true
}

// FTest is a named set of contrast rows tested together.
type FTest struct {
	Name string
	Rows []Contrast
}

// ParseFTest reads an --ftest value 'NAME = EXPR; EXPR; ...'.
func ParseFTest(s string) (FTest, error) {
	i := indexOutsideQuotes(s, '=')
	if i < 0 {
		return FTest{}, fmt.Errorf("--ftest %q: expected 'NAME = EXPR; EXPR; ...'", s)
	}
	ft := FTest{Name: strings.TrimSpace(s[:i])}
	if ft.Name == "" {
		return FTest{}, fmt.Errorf("--ftest %q: the name before '=' is empty", s)
	}
	for k, part := range splitOutsideQuotes(s[i+1:], ';') {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		names, weights, err := parseWeightedSum(part)
		if err != nil {
			return FTest{}, fmt.Errorf("--ftest %q, row %d: %v", s, k+1, err)
		}
		ft.Rows = append(ft.Rows, Contrast{Name: ft.Name, Expr: part, Names: names, Weights: weights})
	}
	if len(ft.Rows) == 0 {
		return FTest{}, fmt.Errorf("--ftest %q has no rows", s)
	}
	return ft, nil
}

// Matrix returns the rows of the test over the design's terms, and false
// when the design lacks a name.
func (f FTest) Matrix(d *Design) ([][]float64, bool) {
	var rows [][]float64
	for _, r := range f.Rows {
		v, ok := r.Vector(d)
		if !ok {
			return nil, false
		}
		rows = append(rows, v)
	}
	return rows, true
}

// Check returns an error when a row names something not in known.
func (f FTest) Check(known []string) error {
	for _, r := range f.Rows {
		r.Name = f.Name
		if err := r.Check(known); err != nil {
			return err
		}
	}
	return nil
}

// ConditionFTest is the default F test of every term of one condition (main
// and derivatives, or FIR bins), named after the condition.
func ConditionFTest(d *Design, cond string) ([][]float64, bool) {
	terms := d.ConditionTerms(cond)
	var rows [][]float64
	for _, j := range terms {
		if d.Terms[j].Kind == TermModulator {
			continue
		}
		r := make([]float64, len(d.Terms))
		r[j] = 1
		rows = append(rows, r)
	}
	return rows, len(rows) > 0
}

// splitOutsideQuotes splits s at every sep that is not inside a double-quoted
// name, so a quoted condition name may hold the separator.
func splitOutsideQuotes(s string, sep rune) []string {
	var parts []string
	start, quoted := 0, false
	for i, r := range s {
		switch {
		case r == '"':
			quoted = !quoted
		case r == sep && !quoted:
			parts = append(parts, s[start:i])
			start = i + 1
		}
	}
	return append(parts, s[start:])
}

// indexOutsideQuotes returns the byte index of the first r outside double
// quotes, or -1.
func indexOutsideQuotes(s string, r rune) int {
	quoted := false
	for i, c := range s {
		switch {
		case c == '"':
			quoted = !quoted
		case c == r && !quoted:
			return i
		}
	}
	return -1
}

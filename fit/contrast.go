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
	if i := strings.Index(s, "="); i >= 0 {
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
			return fmt.Errorf("contrast %q names %q, which is not a condition of this study; known conditions: %s", c.Name, n, strings.Join(ks, ", "))
		}
	}
	return nil
}

// Vector returns c over the design's terms, and false when the design lacks
// one of the names (the condition has no events in this run).
func (c Contrast) Vector(d *Design) ([]float64, bool) {
	v := make([]float64, len(d.Terms))
	for i, n := range c.Names {
		j := d.TermIndex(n)
		if j < 0 {
			return nil, false
		}
		v[j] += c.Weights[i]
	}
	return v, true
}

package fit

import (
	"fmt"
	"math"
)

// HeadRadius is the radius in mm of the sphere on which rotations become
// arc lengths in framewise displacement (Power et al. 2012).
const HeadRadius = 50.0

// ExpandMotion returns the motion columns of the 6-, 12- or 24-parameter
// model: the six parameters as given; 12 adds their backward differences
// d_t = m_t - m_{t-1} (d_0 = 0); 24 adds the squares of both (the
// 24-parameter expansion of Friston et al. 1996, Magnetic Resonance in
// Medicine 35:346-355, in the backward-difference form of Satterthwaite et
// al. 2013, NeuroImage 64:240-256). Squares are taken of the mean-centred
// series, so a square does not repeat its parameter's offset. Names:
// COLUMN, COLUMN:diff, COLUMN:sq, COLUMN:diff:sq.
func ExpandMotion(m []Column, terms int) ([]Column, error) {
	if terms == 0 {
		terms = 6
	}
	if terms != 6 && terms != 12 && terms != 24 {
		return nil, fmt.Errorf("--motion-terms %d: expected 6, 12 or 24", terms)
	}
	if terms == 6 || len(m) == 0 {
		return m, nil
	}
	out := append([]Column(nil), m...)
	diffs := make([]Column, len(m))
	for i, c := range m {
		d := make([]float64, len(c.Values))
		for t := 1; t < len(d); t++ {
			d[t] = c.Values[t] - c.Values[t-1]
		}
		diffs[i] = Column{Name: c.Name + ":diff", Values: d}
	}
	out = append(out, diffs...)
	if terms == 24 {
		for _, c := range append(append([]Column(nil), m...), diffs...) {
			out = append(out, Column{Name: c.Name + ":sq", Values: centredSquare(c.Values)})
		}
	}
	return out, nil
}

func centredSquare(v []float64) []float64 {
	mean := 0.0
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = (x - mean) * (x - mean)
	}
	return out
}

// FramewiseDisplacement returns, per volume, the framewise displacement of
// Power et al. (2012, NeuroImage 59:2142-2154):
//
//	FD_t = |Δtx| + |Δty| + |Δtz| + r (|Δrx| + |Δry| + |Δrz|),  FD_0 = 0,
//
// with backward differences, translations in mm, rotations in radians (or
// degrees when degrees is set, converted) and r = 50 mm. m holds the six
// columns: three translations, then three rotations.
func FramewiseDisplacement(m [][]float64, degrees bool) []float64 {
	if len(m) != 6 {
		panic("fit: framewise displacement needs six motion columns")
	}
	n := len(m[0])
	fd := make([]float64, n)
	rot := HeadRadius
	if degrees {
		rot *= math.Pi / 180
	}
	for t := 1; t < n; t++ {
		s := 0.0
		for j := 0; j < 3; j++ {
			s += math.Abs(m[j][t] - m[j][t-1])
		}
		for j := 3; j < 6; j++ {
			s += rot * math.Abs(m[j][t]-m[j][t-1])
		}
		fd[t] = s
	}
	return fd
}

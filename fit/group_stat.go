package fit

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

// TTest is the result of one t test of one quantity: the estimate, its
// standard error, t = estimate / std error, the degrees of freedom (not
// always whole: Welch) and the two-sided p value.
type TTest struct {
	Estimate, StdError, Statistic, DF, PValue float64
}

func newTTest(est, se, df float64) TTest {
	t := est / se
	return TTest{Estimate: est, StdError: se, Statistic: t, DF: df, PValue: TwoSidedP(t, df)}
}

// OneSampleT tests whether the mean of y is zero (Student 1908):
//
//	estimate = ȳ,  se = s / sqrt(n),  t = ȳ / se,  df = n - 1,
//
// s the sample standard deviation (divisor n - 1); as R's t.test(y). With
// subject-level estimates as y this is the summary-statistics random-effects
// test across subjects (Holmes and Friston 1998, NeuroImage 7:S754).
// It panics on fewer than two values.
func OneSampleT(y []float64) TTest {
	n := len(y)
	if n < 2 {
		panic("fit: one-sample t needs at least two values")
	}
	m, sd := stat.MeanStdDev(y, nil)
	return newTTest(m, sd/math.Sqrt(float64(n)), float64(n-1))
}

// WelchT tests the difference of the means of b and a without assuming
// equal variances (Welch 1947, Biometrika 34:28-35):
//
//	estimate = b̄ - ā,  se = sqrt(s_a²/n_a + s_b²/n_b),
//	df = se⁴ / [ (s_a²/n_a)²/(n_a-1) + (s_b²/n_b)²/(n_b-1) ]  (Satterthwaite),
//
// as R's t.test(b, a) (var.equal = FALSE). It panics on a group of fewer
// than two values.
func WelchT(a, b []float64) TTest {
	if len(a) < 2 || len(b) < 2 {
		panic("fit: Welch's t needs at least two values per group")
	}
	ma, va := stat.MeanVariance(a, nil)
	mb, vb := stat.MeanVariance(b, nil)
	ua, ub := va/float64(len(a)), vb/float64(len(b))
	se2 := ua + ub
	df := se2 * se2 / (ua*ua/float64(len(a)-1) + ub*ub/float64(len(b)-1))
	return newTTest(mb-ma, math.Sqrt(se2), df)
}

// LinearModelT fits y = Xβ + e by least squares (QR, as LeastSquares) and
// returns the classical t test of every coefficient: se_j = sqrt(σ̂²
// [(X'X)^-1]_jj), σ̂² = RSS/(n - k), df = n - k; as R's
// summary(lm(y ~ ...))$coefficients.
func LinearModelT(x *mat.Dense, y []float64) ([]TTest, error) {
	ols, err := LeastSquares(x, y)
	if err != nil {
		return nil, err
	}
	out := make([]TTest, len(ols.Beta))
	for j := range out {
		out[j] = newTTest(ols.Beta[j], ols.StdError[j], float64(ols.DF))
	}
	return out, nil
}

// Holm returns the adjusted p values of Holm's step-down procedure (Holm
// 1979, Scandinavian Journal of Statistics 6:65-70), which controls the
// family-wise error rate:
//
//	p̃_(i) = min(1, max_{j <= i} (m - j + 1) p_(j))
//
// over the m p values sorted ascending; NaN entries are left out (their
// adjusted p is NaN) and do not count in m. The result is in the input
// order, as R's p.adjust(method = "holm") gives it.
func Holm(p []float64) []float64 {
	out := make([]float64, len(p))
	idx := make([]int, 0, len(p))
	for i, v := range p {
		out[i] = math.NaN()
		if !math.IsNaN(v) {
			idx = append(idx, i)
		}
	}
	m := len(idx)
	sort.SliceStable(idx, func(a, b int) bool { return p[idx[a]] < p[idx[b]] })
	run := 0.0
	for r, i := range idx {
		run = math.Max(run, float64(m-r)*p[i])
		out[i] = math.Min(1, run)
	}
	return out
}

// EffectSize is a standardised effect (Cohen's d) with a confidence
// interval.
type EffectSize struct {
	D, Low, High float64
}

// EffectLevel is the confidence level of every effect-size interval.
const EffectLevel = 0.95

// CohenDOneSample returns Cohen's d = ȳ / s for one sample (Cohen 1988,
// Statistical Power Analysis for the Behavioral Sciences, 2nd ed., §2.2),
// with its 95% interval by inverting the noncentral t (DInterval with
// t = d·sqrt(n), df = n - 1, d = ncp / sqrt(n)).
func CohenDOneSample(y []float64) EffectSize {
	n := float64(len(y))
	m, sd := stat.MeanStdDev(y, nil)
	d := m / sd
	return DInterval(d, n-1, math.Sqrt(n))
}

// CohenDTwoSample returns Cohen's d = (b̄ - ā) / s_p for two groups, s_p the
// pooled standard deviation sqrt(((n_a-1)s_a² + (n_b-1)s_b²) / (n_a+n_b-2))
// (Cohen 1988, §2.2), with its 95% interval by inverting the noncentral t of
// the pooled two-sample Student t (DInterval with t = d / sqrt(1/n_a +
// 1/n_b), df = n_a + n_b - 2).
func CohenDTwoSample(a, b []float64) EffectSize {
	na, nb := float64(len(a)), float64(len(b))
	ma, va := stat.MeanVariance(a, nil)
	mb, vb := stat.MeanVariance(b, nil)
	sp := math.Sqrt(((na-1)*va + (nb-1)*vb) / (na + nb - 2))
	d := (mb - ma) / sp
	return DInterval(d, na+nb-2, 1/math.Sqrt(1/na+1/nb))
}

// DInterval returns d with its EffectLevel confidence interval from the
// noncentral t: the observed t = d·scale has a noncentral t distribution
// with df degrees of freedom and noncentrality δ = d_true·scale, so the
// interval is [δ_L, δ_U] / scale, where δ_L and δ_U solve
//
//	P(T <= t; df, δ_L) = (1 + level)/2,  P(T <= t; df, δ_U) = (1 - level)/2
//
// (the CDF falls as δ rises; Steiger and Fouladi 1997, in Harlow, Mulaik and
// Steiger (eds.), What If There Were No Significance Tests?, ch. 9;
// Cumming and Finch 2001, Educational and Psychological Measurement
// 61:532-574). The roots are found by Brent's method to 1e-12 in δ. NaN
// bounds when d is not finite.
func DInterval(d, df, scale float64) EffectSize {
	e := EffectSize{D: d, Low: math.NaN(), High: math.NaN()}
	if math.IsNaN(d) || math.IsInf(d, 0) || df <= 0 {
		return e
	}
	t := d * scale
	e.Low = ncpForCDF(t, df, (1+EffectLevel)/2) / scale
	e.High = ncpForCDF(t, df, (1-EffectLevel)/2) / scale
	return e
}

// ncpForCDF returns the noncentrality δ with P(T <= t; df, δ) = p.
func ncpForCDF(t, df, p float64) float64 {
	f := func(ncp float64) float64 { return NoncentralTCDF(t, df, ncp) - p }
	// The CDF falls in δ; widen a bracket around t until it holds the root.
	step := 2 + 0.1*math.Abs(t)
	lo, hi := t-step, t+step
	for i := 0; f(lo) < 0 && i < 60; i++ {
		lo -= step
		step *= 2
	}
	step = 2 + 0.1*math.Abs(t)
	for i := 0; f(hi) > 0 && i < 60; i++ {
		hi += step
		step *= 2
	}
	return brentRoot(f, lo, hi, 1e-12)
}

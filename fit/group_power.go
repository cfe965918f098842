package fit

import (
	"math"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// NoncentralTCDF returns P(T <= t) for T noncentral t with df degrees of
// freedom and noncentrality ncp: T = (Z + ncp) / sqrt(V/df), Z standard
// normal, V chi-squared with df degrees of freedom, independent.
// NoncentralTUpper gives P(T > t), computed as R computes it (1 minus the
// tail the series sums), so both are accurate to about 1e-12 in absolute
// terms, not relative ones.
//
// For t >= 0 (negate t and ncp otherwise, and take the complement), with
// x = t²/(t²+df) and λ = ncp², the twin series of Lenth (1989, Algorithm
// AS 243, Applied Statistics 38:185-189; Guenther 1978, Journal of
// Statistical Computation and Simulation 6:199-206) is
//
//	P(T <= t) = Φ(-ncp) + Σ_{j>=0} [ p_j I_x(j+1/2, df/2) + q_j I_x(j+1, df/2) ]
//	p_j = e^{-λ/2} (λ/2)^j / (2 j!),  q_j = ncp e^{-λ/2} (λ/2)^j / (2 √2 Γ(j+3/2))
//
// I_x the regularised incomplete beta function, the terms updated by the
// recurrences of AS 243, stopped when the bound 2 s (I_odd - g_odd) on the
// remainder is below 1e-12 (s = 1/2 - Σ p_j) or after 1000 terms. The
// refinements of R's pnt (R Core Team, src/nmath/pnt.c) are followed so that
// results agree with R's pt(q, df, ncp): for df > 4·10^5 or ncp² > 2 ln2 ·
// 1021 the normal approximation of Abramowitz and Stegun 26.7.10,
//
//	P(T <= t) ≈ Φ( (t (1 - 1/(4df)) - ncp) / sqrt(1 + t²/(2df)) ),
//
// a left tail of 0 when t < 0 and ncp > 40, s from expm1 when it is below
// 1e-7, and the result capped at 1.
func NoncentralTCDF(t, df, ncp float64) float64 { return noncentralT(t, df, ncp, true) }

// NoncentralTUpper returns P(T > t) for the noncentral t of NoncentralTCDF.
func NoncentralTUpper(t, df, ncp float64) float64 { return noncentralT(t, df, ncp, false) }

func noncentralT(t, df, ncp float64, lower bool) float64 {
	const (
		itrmax = 1000
		errmax = 1e-12
		// dblMinExp is DBL_MIN_EXP of C's float.h for IEEE doubles.
		dblMinExp = -1021
	)
	if math.IsNaN(t) || math.IsNaN(df) || math.IsNaN(ncp) || df <= 0 {
		return math.NaN()
	}
	if ncp == 0 {
		c := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}
		if lower {
			return c.CDF(t)
		}
		return c.Survival(t)
	}
	if math.IsInf(t, 0) {
		if (t < 0) == lower {
			return 0
		}
		return 1
	}
	var negdel bool
	var tt, del float64
	if t >= 0 {
		tt, del = t, ncp
	} else {
		// P(T <= t) <= P(T <= 0) = Φ(-ncp), below 1e-300 when ncp > 40.
		if ncp > 40 {
			if lower {
				return 0
			}
			return 1
		}
		negdel, tt, del = true, -t, -ncp
	}
	if df > 4e5 || del*del > 2*math.Ln2*(-dblMinExp) {
		s := 1 / (4 * df)
		z := (tt*(1-s) - del) / math.Sqrt(1+tt*tt*2*s)
		return normalCDF(z, lower != negdel)
	}
	x := t * t
	rxb := df / (x + df) // 1 - x, accurately when t² << df
	x = x / (x + df)
	var tnc float64
	if x > 0 {
		lambda := del * del
		p := 0.5 * math.Exp(-0.5*lambda)
		if p == 0 {
			// Unreachable after the branch above (λ < 1415.4 keeps p > 0);
			// R returns 0 in the tail asked for here.
			if lower {
				return 0
			}
			return 1
		}
		q := math.Sqrt(2/math.Pi) * p * del
		s := 0.5 - p
		if s < 1e-7 {
			s = -0.5 * math.Expm1(-0.5*lambda)
		}
		a := 0.5
		b := 0.5 * df
		rxb = math.Pow(rxb, b)
		albeta := 0.5*math.Log(math.Pi) + lgamma(b) - lgamma(0.5+b)
		xodd := mathext.RegIncBeta(a, b, x)
		godd := 2 * rxb * math.Exp(a*math.Log(x)-albeta)
		tnc = b * x
		xeven := 1 - rxb
		if tnc < 0x1p-52 {
			xeven = tnc
		}
		geven := tnc * rxb
		tnc = p*xodd + q*xeven
		for it := 1; it <= itrmax; it++ {
			a++
			xodd -= godd
			xeven -= geven
			godd *= x * (a + b - 1) / a
			geven *= x * (a + b - 0.5) / (a + 0.5)
			p *= lambda / float64(2*it)
			q *= lambda / float64(2*it+1)
			tnc += p*xodd + q*xeven
			s -= p
			if s < -1e-10 || (s <= 0 && it > 1) {
				break
			}
			if math.Abs(2*s*(xodd-godd)) < errmax {
				break
			}
		}
	}
	tnc += normalCDF(-del, true)
	tnc = math.Min(tnc, 1)
	if lower != negdel {
		return tnc
	}
	return 0.5 - tnc + 0.5
}

// normalCDF is Φ(z) (lower) or 1 - Φ(z), each from erfc so that both tails
// keep their relative precision.
func normalCDF(z float64, lower bool) float64 {
	if lower {
		return 0.5 * math.Erfc(-z/math.Sqrt2)
	}
	return 0.5 * math.Erfc(z/math.Sqrt2)
}

func lgamma(x float64) float64 {
	v, _ := math.Lgamma(x)
	return v
}

// StudentTQuantile returns the p quantile of Student's t with df degrees
// of freedom (R's qt(p, df)).
func StudentTQuantile(p, df float64) float64 {
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}.Quantile(p)
}

// tQuantileUpper returns the t value exceeded with probability p by a
// central Student's t with df degrees of freedom (R's qt(p, df,
// lower.tail = FALSE)).
func tQuantileUpper(p, df float64) float64 {
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}.Quantile(1 - p)
}

// PowerAlpha is the two-sided significance level of every power
// calculation, as the issue fixes it.
const PowerAlpha = 0.05

// TwoSidedPower returns the exact power of the two-sided t test at level
// alpha when the test statistic is noncentral t with df degrees of freedom
// and noncentrality ncp:
//
//	power = P(T > q) + P(T < -q),  q = t_{df, 1-alpha/2},
//
// both tails counted (R's power.t.test with strict = TRUE).
func TwoSidedPower(df, ncp, alpha float64) float64 {
	q := tQuantileUpper(alpha/2, df)
	return NoncentralTUpper(q, df, ncp) + NoncentralTCDF(-q, df, ncp)
}

// PowerOneSample is the power of the two-sided one-sample t test of n
// subjects for a true standardised effect d = mean/sd: df = n - 1,
// ncp = d·sqrt(n).
func PowerOneSample(n int, d, alpha float64) float64 {
	return TwoSidedPower(float64(n-1), d*math.Sqrt(float64(n)), alpha)
}

// PowerTwoSample is the power of the two-sided two-sample Student t test
// with n1 and n2 subjects for a true standardised difference d (difference
// over the common sd): df = n1 + n2 - 2, ncp = d / sqrt(1/n1 + 1/n2).
func PowerTwoSample(n1, n2 int, d, alpha float64) float64 {
	return TwoSidedPower(float64(n1+n2-2), d/math.Sqrt(1/float64(n1)+1/float64(n2)), alpha)
}

// MaxSampleSize bounds the sample-size search; an effect that needs more
// subjects than this is reported as unreachable (size 0).
const MaxSampleSize = 10_000_000

// SampleSize returns the smallest n >= 2 (subjects for groups = 1, subjects
// per group for groups = 2, equal groups) whose exact two-sided power
// (PowerOneSample, PowerTwoSample) at level alpha reaches target for the
// standardised effect d. Power rises with n, so n is found by doubling then
// bisection over the integers; this is the ceiling of the n that R's
// power.t.test(delta = d, power = target, strict = TRUE, type = ...) solves
// for. It returns 0 when d is 0 or not finite, or n would exceed
// MaxSampleSize.
func SampleSize(d, target, alpha float64, groups int) int {
	if d == 0 || math.IsNaN(d) || math.IsInf(d, 0) {
		return 0
	}
	power := func(n int) float64 {
		if groups == 2 {
			return PowerTwoSample(n, n, d, alpha)
		}
		return PowerOneSample(n, d, alpha)
	}
	lo, hi := 1, 2 // power(lo) < target <= power(hi), lo = 1 standing for "none"
	for power(hi) < target {
		if hi >= MaxSampleSize {
			return 0
		}
		lo, hi = hi, min(2*hi, MaxSampleSize)
	}
	for hi-lo > 1 {
		mid := lo + (hi-lo)/2
		if power(mid) >= target {
			hi = mid
		} else {
			lo = mid
		}
	}
	return hi
}

// DetectableEffect returns the smallest standardised effect d > 0 that the
// two-sided test at level alpha detects with the given power: the root in d
// of PowerOneSample(n1, d) = power (n2 = 0) or PowerTwoSample(n1, n2, d) =
// power, by Brent's method to 1e-12. It is R's power.t.test(n = n,
// power = power, strict = TRUE)$delta for one sample or two equal groups.
// NaN when there are too few subjects (n1 < 2, or a group below 2).
func DetectableEffect(n1, n2 int, power, alpha float64) float64 {
	if n1 < 2 || (n2 != 0 && n2 < 2) {
		return math.NaN()
	}
	f := func(d float64) float64 {
		if n2 == 0 {
			return PowerOneSample(n1, d, alpha) - power
		}
		return PowerTwoSample(n1, n2, d, alpha) - power
	}
	lo, hi := 1e-7, 10.0
	for f(hi) < 0 {
		lo, hi = hi, 2*hi
		if hi > 1e6 {
			return math.NaN()
		}
	}
	return brentRoot(f, lo, hi, 1e-12)
}

// brentRoot finds a zero of f in [a, b], f(a) and f(b) of opposite signs,
// by Brent's method (Brent 1973, Algorithms for Minimization without
// Derivatives, ch. 4: bisection, secant and inverse quadratic steps), to an
// absolute tolerance of tol plus 4 ulps of the root. It is the algorithm
// of R's uniroot.
func brentRoot(f func(float64) float64, a, b, tol float64) float64 {
	const eps = 0x1p-52
	fa, fb := f(a), f(b)
	if fa == 0 {
		return a
	}
	if fb == 0 {
		return b
	}
	if (fa > 0) == (fb > 0) {
		return math.NaN()
	}
	c, fc := a, fa
	d := b - a
	e := d
	for iter := 0; iter < 200; iter++ {
		if (fb > 0) == (fc > 0) {
			c, fc = a, fa
			d = b - a
			e = d
		}
		if math.Abs(fc) < math.Abs(fb) {
			a, b, c = b, c, b
			fa, fb, fc = fb, fc, fb
		}
		tol1 := 2*eps*math.Abs(b) + 0.5*tol
		xm := 0.5 * (c - b)
		if math.Abs(xm) <= tol1 || fb == 0 {
			return b
		}
		if math.Abs(e) >= tol1 && math.Abs(fa) > math.Abs(fb) {
			var p, q float64
			s := fb / fa
			if a == c {
				p = 2 * xm * s
				q = 1 - s
			} else {
				q0 := fa / fc
				r := fb / fc
				p = s * (2*xm*q0*(q0-r) - (b-a)*(r-1))
				q = (q0 - 1) * (r - 1) * (s - 1)
			}
			if p > 0 {
				q = -q
			}
			p = math.Abs(p)
			if 2*p < math.Min(3*xm*q-math.Abs(tol1*q), math.Abs(e*q)) {
				e = d
				d = p / q
			} else {
				d = xm
				e = d
			}
		} else {
			d = xm
			e = d
		}
		a, fa = b, fb
		if math.Abs(d) > tol1 {
			b += d
		} else {
			b += math.Copysign(tol1, xm)
		}
		fb = f(b)
	}
	return b
}

package fit

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// DurbinWatson returns d = sum_{t>0} (r_t - r_{t-1})² / sum_t r_t²
// (Durbin and Watson 1950); near 2 for uncorrelated residuals, below 2 for
// positive autocorrelation.
func DurbinWatson(r []float64) float64 {
	num, den := 0.0, 0.0
	for t, v := range r {
		den += v * v
		if t > 0 {
			d := v - r[t-1]
			num += d * d
		}
	}
	return num / den
}

// LjungBoxLag is the number of lags the Ljung-Box test uses for a series of
// n residuals: min(10, n/5), a common practice choice (Box, Jenkins and
// Reinsel 2008, §8.2.2 use 10-20 lags; n/5 keeps short runs valid).
func LjungBoxLag(n int) int {
	return min(10, n/5)
}

// LjungBox returns the portmanteau statistic of Ljung and Box (1978,
// Biometrika 65:297-303)
//
//	Q = n (n + 2) sum_{k=1..h} ρ̂_k² / (n - k)
//
// with ρ̂_k the lag-k autocorrelation of r about its mean, and its p value
// from the chi-square distribution with h - fitdf degrees of freedom (fitdf
// the number of fitted AR parameters), as R's Box.test(type = "Ljung-Box").
func LjungBox(r []float64, h, fitdf int) (q, p float64) {
	if h < 1 || h-fitdf < 1 || len(r) <= h {
		return math.NaN(), math.NaN()
	}
	return ljungBoxACF(Autocorrelation(r, h), len(r), fitdf)
}

// ljungBoxACF is LjungBox from the autocorrelations ρ̂_1..ρ̂_h of n
// residuals.
func ljungBoxACF(acf []float64, n, fitdf int) (q, p float64) {
	h := len(acf)
	if h < 1 || h-fitdf < 1 || n <= h {
		return math.NaN(), math.NaN()
	}
	for k, rho := range acf {
		q += rho * rho / float64(n-k-1)
	}
	q *= float64(n) * float64(n+2)
	p = distuv.ChiSquared{K: float64(h - fitdf)}.Survival(q)
	return q, p
}

// JarqueBera returns the normality statistic of Jarque and Bera (1987,
// International Statistical Review 55:163-172)
//
//	JB = n/6 (S² + (K - 3)²/4)
//
// with S and K the sample skewness and kurtosis from moments about the mean
// (divided by n), and its p value from the chi-square distribution with 2
// degrees of freedom, exp(-JB/2).
func JarqueBera(r []float64) (jb, p float64) {
	n := float64(len(r))
	mean := 0.0
	for _, v := range r {
		mean += v
	}
	mean /= n
	// The deviations are taken at unit scale (times a power of two, which
	// is exact), so that their fourth powers neither overflow nor vanish;
	// skewness and kurtosis do not depend on the scale.
	big := 0.0
	for _, v := range r {
		if a := math.Abs(v - mean); a > big {
			big = a
		}
	}
	c := 1.0
	if big > 0 && !math.IsInf(big, 0) {
		_, e := math.Frexp(big)
		c = math.Ldexp(1, -e)
	}
	var m2, m3, m4 float64
	for _, v := range r {
		d := (v - mean) * c
		d2 := d * d
		m2 += d2
		m3 += d2 * d
		m4 += d2 * d2
	}
	m2 /= n
	m3 /= n
	m4 /= n
	s := m3 / math.Pow(m2, 1.5)
	k := m4 / (m2 * m2)
	jb = n / 6 * (s*s + (k-3)*(k-3)/4)
	return jb, math.Exp(-jb / 2)
}

package fit

import (
	"fmt"
	"math"
)

// ARMA(1,1) noise, the process
//
//	e_t = φ e_{t-1} + u_t + θ u_{t-1},   u_t independent, variance 1,
//
// (the sign convention of R's arima and nlme's corARMA). AR(1) plus white
// noise is the special case θ ∈ [-φ, 0] (for φ ≥ 0; [0, -φ] for φ < 0): with
// a_t an AR(1) process of coefficient φ and w_t white, (1 - φB)(a_t + w_t)
// is an MA(1) process whose lag-1 autocovariance -φ var(w) has the sign
// opposite to φ, and θ = -φ is pure white noise.

// ARMAAutocovariance returns g_0..g_lags of the ARMA(1,1) process with unit
// innovation variance (Box, Jenkins and Reinsel 2008, §3.4.1):
//
//	g_0 = (1 + 2φθ + θ²) / (1 - φ²),   g_1 = (1 + φθ)(φ + θ) / (1 - φ²),
//	g_k = φ g_{k-1}  (k ≥ 2).
func ARMAAutocovariance(phi, theta float64, lags int) []float64 {
	g := make([]float64, lags+1)
	d := 1 - phi*phi
	g[0] = (1 + 2*phi*theta + theta*theta) / d
	if lags >= 1 {
		g[1] = (1 + phi*theta) * (phi + theta) / d
	}
	for k := 2; k <= lags; k++ {
		g[k] = phi * g[k-1]
	}
	return g
}

// ARMAWhiteShare reads an ARMA(1,1) as AR(1) plus white noise: it returns
// the share of the marginal variance that is white, 1 - ρ_1/φ with ρ_1 =
// g_1/g_0, and ok = false when the model is not of that form (θ outside
// [-φ, 0], or φ = 0 with θ ≠ 0).
func ARMAWhiteShare(phi, theta float64) (share float64, ok bool) {
	if math.Abs(phi) < 1e-12 {
		return math.NaN(), false
	}
	g := ARMAAutocovariance(phi, theta, 1)
	share = 1 - g[1]/g[0]/phi
	// Rounding can put the ends of the range a few ulps outside [0, 1].
	const slack = 1e-12
	if share < -slack || share > 1+slack {
		return math.NaN(), false
	}
	return math.Min(1, math.Max(0, share)), true
}

// ARMAWhitener is the exact whitening transform of ARMA(1,1) noise with unit
// innovation variance, every volume kept. The AR part is removed by the
// Prais-Winsten transform
//
//	w_0 = sqrt(1 - φ²) e_0,   w_t = e_t - φ e_{t-1}  (t ≥ 1),
//
// after which w has the tridiagonal covariance N with N_00 = 1 + 2φθ + θ²,
// N_01 = sqrt(1 - φ²) θ, N_tt = 1 + θ² and N_{t,t+1} = θ for t ≥ 1; its
// Cholesky factor is bidiagonal, N = L L' with L_tt = l_t and L_{t,t-1} =
// m_t, and z = L^-1 w is white: z_0 = w_0 / l_0, z_t = (w_t - m_t z_{t-1}) / l_t
// (the innovations algorithm of Brockwell and Davis 1991, §5.3, for this
// model). The pivots converge geometrically (l_t → 1, m_t → θ), so only the
// first few dozen differ from their limits.
type ARMAWhitener struct {
	Phi, Theta float64
	l, m       []float64 // pivots up to where they reach their limits
	// LogDet is log|V| for the n volumes the whitener was made for.
	LogDet float64
	G0     float64 // marginal variance per unit innovation variance
}

// armaLimit bounds |φ| and |θ| of an estimated ARMA(1,1): beyond 0.99 the
// process is too close to a unit root (φ) or to non-invertibility (θ) for
// the whitening to be numerically stable.
const armaLimit = 0.99

// NewARMAWhitener prepares the transform for n volumes; |φ| and |θ| must be
// below 1.
func NewARMAWhitener(phi, theta float64, n int) (*ARMAWhitener, error) {
	if !(math.Abs(phi) < 1) || !(math.Abs(theta) < 1) {
		return nil, fmt.Errorf("ARMA(1,1) coefficients φ=%g θ=%g are not stationary and invertible", phi, theta)
	}
	w := &ARMAWhitener{Phi: phi, Theta: theta, G0: ARMAAutocovariance(phi, theta, 0)[0]}
	n00 := 1 + 2*phi*theta + theta*theta
	l0 := math.Sqrt(n00)
	w.l = append(w.l, l0)
	w.m = append(w.m, 0)
	logDet := 2 * math.Log(l0)
	off := math.Sqrt(1-phi*phi) * theta
	diag := 1 + theta*theta
	prev := l0
	for t := 1; t < n; t++ {
		m := off / prev
		l := math.Sqrt(diag - m*m)
		logDet += 2 * math.Log(l)
		if len(w.l) == t {
			w.l = append(w.l, l)
			w.m = append(w.m, m)
		}
		// Once the pivot has reached its limit to rounding, every later
		// one equals it: keep the rest implicit.
		if len(w.l) == t+1 && math.Abs(l-prev) < 1e-16 && math.Abs(m-w.m[t-1]) < 1e-16 && t > 1 {
			logDet += float64(n-1-t) * 2 * math.Log(l)
			break
		}
		prev = l
		off = theta
	}
	// log|V| = log|N| - log|T_φ|², T_φ the Prais-Winsten transform.
	w.LogDet = logDet - math.Log(1-phi*phi)
	return w, nil
}

func (w *ARMAWhitener) pivot(t int) (l, m float64) {
	if t < len(w.l) {
		return w.l[t], w.m[t]
	}
	return w.l[len(w.l)-1], w.m[len(w.m)-1]
}

// Apply writes the whitened series of src into dst (same length; may not
// alias).
func (w *ARMAWhitener) Apply(dst, src []float64) {
	n := len(src)
	if n == 0 {
		return
	}
	phi := w.Phi
	z := math.Sqrt(1-phi*phi) * src[0] / w.l[0]
	dst[0] = z
	for t := 1; t < n; t++ {
		l, m := w.pivot(t)
		z = (src[t] - phi*src[t-1] - m*z) / l
		dst[t] = z
	}
}

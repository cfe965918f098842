package fit

import (
	"fmt"
	"math"
)

// noiseParams is one stationary noise model with unit innovation variance:
// AR(P) when ma is empty (ar = a_1..a_P), ARMA(1,1) when ma = [θ] (ar = [φ]).
type noiseParams struct {
	ar, ma []float64
}

func (p noiseParams) isARMA() bool { return len(p.ma) > 0 }

// count is the number of correlation parameters (P, or 2 for ARMA(1,1)).
func (p noiseParams) count() int { return len(p.ar) + len(p.ma) }

// name is the --noise spelling of the model: ar1, ar:P or arma.
func (p noiseParams) name() string {
	switch {
	case p.isARMA():
		return "arma"
	case len(p.ar) == 1:
		return "ar1"
	case len(p.ar) == 0:
		return "none"
	}
	return fmt.Sprintf("ar:%d", len(p.ar))
}

// maxChange is the largest absolute difference between the
// autocorrelations at lags 1..lags of two models (of any form): a measure of
// how much the modelled covariance moved that does not depend on how the
// models are parametrised.
func (p noiseParams) maxChange(q noiseParams, lags int) float64 {
	a, b := p.autocovariance(lags), q.autocovariance(lags)
	d := 0.0
	for k := 1; k <= lags; k++ {
		d = math.Max(d, math.Abs(a[k]/a[0]-b[k]/b[0]))
	}
	return d
}

// autocovariance returns g_0..g_lags of the model.
func (p noiseParams) autocovariance(lags int) []float64 {
	if p.isARMA() {
		return ARMAAutocovariance(p.ar[0], p.ma[0], lags)
	}
	g := make([]float64, lags+1)
	if len(p.ar) == 0 {
		g[0] = 1
		return g
	}
	h, ok := ARAutocovariance(p.ar)
	if !ok {
		panic("fit: autocovariance of a non-stationary AR model")
	}
	for k := 0; k <= lags; k++ {
		if k < len(h) {
			g[k] = h[k]
			continue
		}
		s := 0.0
		for i, a := range p.ar {
			s += a * g[k-1-i]
		}
		g[k] = s
	}
	return g
}

// precision is the inverse covariance V^-1 of n volumes of a stationary
// model with unit innovation variance, in the form
//
//	V^-1 = Toep(v_0..v_D) + sum_m s_m (b_m b_m' + J b_m b_m' J),
//
// where Toep(v) is the symmetric Toeplitz matrix of the inverse
// autocovariances (zero beyond lag D), b_m a vector supported on the last
// len(u_m) volumes (u_m[i] is its entry at volume n-1-i) and J the reversal,
// so that J b_m is the same vector at the first volumes. The corners follow
// from the exact whitening z = T e (T'T = V^-1): the rows of a stationary
// filter u_t = sum_j π_j e_{t-j} summed over all t give Toep(v) with v_d =
// sum_j π_j π_{j+d}; the rows t ≥ n that do not exist are subtracted at the
// end (the b_m), and V^-1 is persymmetric (V is symmetric Toeplitz), which
// fixes the start (Siddiqui 1958, Biometrika 45:111-122, for AR(P)).
//
//   - AR(P), α_0 = 1, α_i = -a_i: v_d = sum_i α_i α_{i+d} (d ≤ P), and the
//     missing row n+s (s = 0..P-1) gives s_m = -1, u_m[i] = α_{s+1+i}. Exact
//     whenever n ≥ 2P.
//   - ARMA(1,1), π_j = -(φ+θ)(-θ)^{j-1}: v_0 = (1 + 2φθ + φ²)/(1-θ²),
//     v_d = -(1+φθ)(φ+θ)(-θ)^{d-1}/(1-θ²), and the missing rows sum to one
//     term with s = -(φ+θ)²/(1-θ²), u[i] = (-θ)^i. The start and end terms
//     interact only through (-θ)^n, which precisionTol bounds; the
//     geometric tails are cut where they fall below precisionTol.
//
// TestPrecisionStructure checks both forms against the dense inverse.
type precision struct {
	v []float64   // v_0..v_D
	u [][]float64 // corner vectors, entry i at volume n-1-i (and i)
	s []float64
	// geo is -θ for ARMA(1,1), whose lags are v_d = v_1 geo^{d-1} for
	// every d ≥ 1 (v holds them up to where they vanish); 0 for AR(P).
	geo float64
}

// precisionTol is the relative size below which the geometric tails of an
// ARMA precision are dropped. The dropped lags d > D change Q'V^-1Q by at
// most 2 sum_{d>D} |v_d| (each lag_d has norm at most 2), so the GLS
// solution moves by about this relative amount: below the 1e-8 to which it
// is checked against statsmodels, and far below any statistical error.
const precisionTol = 1e-11

// maxPrecisionLags caps the Toeplitz lags of the many-regions fast path;
// an ARMA(1,1) whose MA coefficient needs more (|θ| above fastMALimit,
// 0.67) is fitted by whitening Q per region (see gls).
const maxPrecisionLags = 64

// newPrecision returns the structure of V^-1 for n volumes, and ok = false
// when the structure above does not hold to precisionTol within
// maxPrecisionLags lags (an ARMA with |θ| near 1, or a run too short).
func newPrecision(p noiseParams, n int) (pr precision, ok bool) {
	if p.isARMA() {
		phi, th := p.ar[0], p.ma[0]
		d := 1 - th*th
		v0 := (1 + 2*phi*th + phi*phi) / d
		v1 := -(1 + phi*th) * (phi + th) / d
		s := -(phi + th) * (phi + th) / d
		pr.v = []float64{v0}
		// Lags while |v_d| or the corner entries matter.
		lag := 1
		f := 1.0 // (-θ)^{d-1}
		for lag <= maxPrecisionLags {
			vd := v1 * f
			if math.Abs(vd) <= precisionTol*v0 && math.Abs(f*th) <= precisionTol {
				break
			}
			pr.v = append(pr.v, vd)
			f *= -th
			lag++
		}
		if lag > maxPrecisionLags || len(pr.v) >= n {
			return pr, false
		}
		if float64(n)*math.Log(math.Abs(th)+1e-300) > math.Log(precisionTol) && th != 0 {
			return pr, false
		}
		if s != 0 {
			u := make([]float64, len(pr.v))
			g := 1.0
			for i := range u {
				u[i] = g
				g *= -th
			}
			pr.u = [][]float64{u}
			pr.s = []float64{s}
		}
		pr.geo = -th
		return pr, true
	}
	P := len(p.ar)
	if n < 2*P {
		return pr, false
	}
	alpha := make([]float64, P+1)
	alpha[0] = 1
	for i, a := range p.ar {
		alpha[i+1] = -a
	}
	pr.v = make([]float64, P+1)
	for d := 0; d <= P; d++ {
		s := 0.0
		for i := 0; i+d <= P; i++ {
			s += alpha[i] * alpha[i+d]
		}
		pr.v[d] = s
	}
	for s := 0; s < P; s++ {
		u := make([]float64, P-s)
		for i := range u {
			u[i] = alpha[s+1+i]
		}
		pr.u = append(pr.u, u)
		pr.s = append(pr.s, -1)
	}
	return pr, true
}

// lags is D, the largest Toeplitz lag.
func (pr precision) lags() int { return len(pr.v) - 1 }

// apply writes V^-1 x into dst (same length, no aliasing). For ARMA(1,1)
// the Toeplitz part is applied by two first-order recursions (the geometric
// lags summed forward and backward), O(n) whatever D is.
func (pr precision) apply(dst, x []float64) {
	n := len(x)
	v := pr.v
	for t := range x {
		dst[t] = v[0] * x[t]
	}
	if pr.geo != 0 && len(v) > 1 {
		// sum_{d≥1} v_1 g^{d-1} (x_{t-d} + x_{t+d}), g = -θ.
		g, v1 := pr.geo, v[1]
		f := 0.0
		for t := 1; t < n; t++ {
			f = x[t-1] + g*f
			dst[t] += v1 * f
		}
		b := 0.0
		for t := n - 2; t >= 0; t-- {
			b = x[t+1] + g*b
			dst[t] += v1 * b
		}
	} else {
		for d := 1; d < len(v); d++ {
			vd := v[d]
			for t := d; t < n; t++ {
				dst[t] += vd * x[t-d]
				dst[t-d] += vd * x[t]
			}
		}
	}
	for m, u := range pr.u {
		bot, top := 0.0, 0.0
		for i, ui := range u {
			bot += ui * x[n-1-i]
			top += ui * x[i]
		}
		sm := pr.s[m]
		for i, ui := range u {
			dst[n-1-i] += sm * bot * ui
			dst[i] += sm * top * ui
		}
	}
}

// whitener is an exact whitening transform (Whitener, ARMAWhitener).
type whitener interface {
	Apply(dst, src []float64)
}

// whitener returns the exact whitening of n volumes of the model and its
// marginal variance g_0 per unit innovation variance.
func (p noiseParams) whitener(n int) (whitener, float64, error) {
	if p.isARMA() {
		w, err := NewARMAWhitener(p.ar[0], p.ma[0], n)
		if err != nil {
			return nil, 0, err
		}
		return w, w.G0, nil
	}
	w, err := NewWhitener(p.ar)
	if err != nil {
		return nil, 0, err
	}
	return w, w.G0, nil
}

// quadraticScratch returns x'V^-1 x, using scratch (len(x)) for ARMA
// models, whose Toeplitz part is applied in O(n).
func (pr precision) quadraticScratch(x, scratch []float64) float64 {
	if pr.geo != 0 {
		pr.apply(scratch, x)
		return vdot(x, scratch)
	}
	return pr.quadratic(x)
}

// modelVariance is σ²(model) on corrected autocovariances g_0..g_L (see
// estimate.go): the innovation variance the model's inverse
// autocovariances assign to g.
func modelVariance(p noiseParams, g []float64) float64 {
	if p.isARMA() {
		return armaVariance(g, p.ar[0], p.ma[0])
	}
	P := len(p.ar)
	if P >= len(g) {
		return math.NaN()
	}
	alpha := make([]float64, P+1)
	alpha[0] = 1
	for i, a := range p.ar {
		alpha[i+1] = -a
	}
	s := 0.0
	for d := 0; d <= P; d++ {
		v := 0.0
		for i := 0; i+d <= P; i++ {
			v += alpha[i] * alpha[i+d]
		}
		if d == 0 {
			s += v * g[0]
		} else {
			s += 2 * v * g[d]
		}
	}
	return s
}

// quadratic returns x' V^-1 x, with the Toeplitz part truncated at lag D.
func (pr precision) quadratic(x []float64) float64 {
	n := len(x)
	v := pr.v
	q := v[0] * vdot(x, x)
	for d := 1; d < len(v) && d < n; d++ {
		q += 2 * v[d] * vdot(x[:n-d], x[d:])
	}
	for m, u := range pr.u {
		bot, top := 0.0, 0.0
		for i, ui := range u {
			bot += ui * x[n-1-i]
			top += ui * x[i]
		}
		q += pr.s[m] * (bot*bot + top*top)
	}
	return q
}

package fit

import (
	"math"
)

// Estimating a noise model from corrected autocovariances g_0..g_L.
//
// Every candidate is fitted and scored by the same Gaussian likelihood of
// the residual error contrasts in Whittle's form (Whittle 1953; Brockwell
// and Davis 1991, §10.8): for a model with inverse autocovariances v_d
// (unit innovation variance), the innovation variance it leaves is
//
//	σ²(model) = v_0 g_0 + 2 sum_{d=1..L} v_d g_d,
//
// -2 log likelihood ≈ N log σ²(model) with N = n - rank(X) the residual
// degrees of freedom (the restricted, REML, count), and the corrected g
// remove the design's pull on the residual autocorrelation (Worsley et al.
// 2002). Minimising σ² over AR(P) is Yule-Walker (Levinson-Durbin); over
// ARMA(1,1) it is a two-parameter search. Models are compared by Akaike's
// criterion AIC = N log σ² + 2 q, q the number of correlation parameters: the
// criterion of R's ar(method = "yule-walker", aic = TRUE) with N its n.used
// (checked in TestOrderSelectionAgainstR).

// levinson runs Levinson-Durbin on g_0..g_P and returns the AR(p)
// coefficients and innovation variances for every p up to the first order
// whose reflection coefficient leaves (-stationaryLimit, stationaryLimit),
// which is where a stationary model stops being determined by g.
func levinson(g []float64, P int) (coefs [][]float64, vars []float64) {
	if g[0] <= 0 || math.IsNaN(g[0]) {
		return nil, nil
	}
	vars = make([]float64, 1, P+1)
	vars[0] = g[0]
	coefs = make([][]float64, 1, P+1)
	prev := []float64{}
	v := g[0]
	for p := 1; p <= P && p < len(g); p++ {
		acc := g[p]
		for i := 1; i < p; i++ {
			acc -= prev[i-1] * g[p-i]
		}
		kappa := acc / v
		if !(math.Abs(kappa) < stationaryLimit) {
			break
		}
		a := make([]float64, p)
		a[p-1] = kappa
		for i := 1; i < p; i++ {
			a[i-1] = prev[i-1] - kappa*prev[p-i-1]
		}
		v *= 1 - kappa*kappa
		coefs = append(coefs, a)
		vars = append(vars, v)
		prev = a
	}
	return coefs, vars
}

// armaInverseAutocovariance returns v_0 and v_1 of ARMA(1,1) (unit
// innovation variance); v_d = v_1 (-θ)^{d-1} for d ≥ 1 (see precision).
func armaInverseAutocovariance(phi, theta float64) (v0, v1 float64) {
	d := 1 - theta*theta
	return (1 + 2*phi*theta + phi*phi) / d, -(1 + phi*theta) * (phi + theta) / d
}

// armaVariance is σ²(ARMA(1,1)) on g_0..g_L.
func armaVariance(g []float64, phi, theta float64) float64 {
	v0, v1 := armaInverseAutocovariance(phi, theta)
	s, f := 0.0, 1.0
	for d := 1; d < len(g); d++ {
		s += f * g[d]
		f *= -theta
	}
	return v0*g[0] + 2*v1*s
}

// fitARMAWhittle minimises σ²(ARMA(1,1)) over |φ|, |θ| ≤ armaLimit. For
// fixed θ, σ² is a quadratic in φ,
//
//	σ²(1-θ²) = g_0 (1 + 2φθ + φ²) - 2 S(θ) (1 + φθ)(φ + θ),
//	S(θ) = sum_{d=1..L} (-θ)^{d-1} g_d,
//
// minimised at φ*(θ) = (S (1 + θ²) - g_0 θ) / (g_0 - 2 S θ) (clamped to
// the limit), so the search is over θ alone (|θ| ≤ whittleMALimit): a grid
// of 41 points, then
// Brent's method (brentMin) on the bracket around the best one. ok is false when no parameter value gives a positive variance (g
// not positive definite).
func fitARMAWhittle(g []float64) (phi, theta, v float64, ok bool) {
	gd := g[1:]
	prof := func(th float64) (float64, float64) {
		// S(θ) by Horner's rule from the last lag down.
		s := 0.0
		for d := len(gd); d > 0; d-- {
			s = gd[d-1] - th*s
		}
		den := g[0] - 2*s*th
		p := armaLimit
		if den > 0 {
			p = (s*(1+th*th) - g[0]*th) / den
		} else if s*(1+th*th)-g[0]*th < 0 {
			p = -armaLimit
		}
		p = math.Max(-armaLimit, math.Min(armaLimit, p))
		val := (g[0]*(1+2*p*th+p*p) - 2*s*(1+p*th)*(p+th)) / (1 - th*th)
		if !(val > 0) {
			val = math.Inf(1)
		}
		return val, p
	}
	tmax := whittleMALimit(len(g) - 1)
	const grid = 41
	step := 2 * tmax / (grid - 1)
	best, bv := -1, math.Inf(1)
	for i := 0; i < grid; i++ {
		if v, _ := prof(-tmax + float64(i)*step); v < bv {
			best, bv = i, v
		}
	}
	if best < 0 {
		return 0, 0, 0, false
	}
	lo := math.Max(-tmax, -tmax+float64(best-1)*step)
	hi := math.Min(tmax, -tmax+float64(best+1)*step)
	th := brentMin(func(x float64) float64 { v, _ := prof(x); return v }, lo, hi, 1e-10)
	v, phi = prof(th)
	if math.IsInf(v, 1) {
		return 0, 0, 0, false
	}
	return phi, th, v, true
}

// whittleMALimit bounds |θ| of the Whittle fit on L lags: σ² weights lag d
// by (-θ)^{d-1} and knows nothing beyond lag L, so an MA coefficient whose
// weights have not decayed by lag L could exploit the missing lags. The
// bound keeps |θ|^L at or below 1% and |θ| within fastMALimit, where the
// many-regions path holds; AR(1) plus white noise has |θ| ≤ 0.6 up to a
// coefficient of 0.9 at half white, and AR(P) candidates remain for
// noise beyond it.
func whittleMALimit(L int) float64 {
	if L == 16 {
		return whittleMALimit16
	}
	return math.Min(fastMALimit, math.Pow(0.01, 1/float64(max(L, 1))))
}

var whittleMALimit16 = math.Min(fastMALimit, math.Pow(0.01, 1.0/16))

// fastMALimit is the largest |θ| whose precision structure fits in
// maxPrecisionLags lags to precisionTol.
var fastMALimit = math.Pow(precisionTol, 1/float64(maxPrecisionLags))

// brentMin minimises f on [a, b] by Brent's method (Brent 1973,
// Algorithms for Minimization without Derivatives, ch. 5: golden-section
// steps, and parabolic interpolation through the three best points where it
// stays inside the bracket and shrinks it fast enough), as R's optimize():
// it stops when the bracket around the best point x is within 2 tol1 of it,
// tol1 = sqrt(ε)|x| + tol/3, ε the machine epsilon (closer than sqrt(ε)|x|,
// f's values no longer tell points apart near a minimum). A parabola is
// tried only through finite values, so regions where f is +Inf (no valid
// model) take golden steps.
func brentMin(f func(float64) float64, a, b, tol float64) float64 {
	const cgold = 0.3819660112501051 // (3 - sqrt(5)) / 2
	const sqrtEps = 1.4901161193847656e-08
	x := a + cgold*(b-a)
	w, v := x, x
	fx := f(x)
	fw, fv := fx, fx
	d, e := 0.0, 0.0
	for iter := 0; iter < 200; iter++ {
		m := 0.5 * (a + b)
		tol1 := sqrtEps*math.Abs(x) + tol/3
		tol2 := 2 * tol1
		if math.Abs(x-m) <= tol2-0.5*(b-a) {
			break
		}
		golden := true
		if math.Abs(e) > tol1 && !math.IsInf(fx, 0) && !math.IsInf(fw, 0) && !math.IsInf(fv, 0) {
			r := (x - w) * (fx - fv)
			q := (x - v) * (fx - fw)
			p := (x-v)*q - (x-w)*r
			q = 2 * (q - r)
			if q > 0 {
				p = -p
			} else {
				q = -q
			}
			r, e = e, d
			if math.Abs(p) < math.Abs(0.5*q*r) && p > q*(a-x) && p < q*(b-x) {
				d = p / q
				if u := x + d; u-a < tol2 || b-u < tol2 {
					d = math.Copysign(tol1, m-x)
				}
				golden = false
			}
		}
		if golden {
			if x < m {
				e = b - x
			} else {
				e = a - x
			}
			d = cgold * e
		}
		u := x + d
		if math.Abs(d) < tol1 {
			u = x + math.Copysign(tol1, d)
		}
		fu := f(u)
		if fu <= fx {
			if u < x {
				b = x
			} else {
				a = x
			}
			v, fv, w, fw, x, fx = w, fw, x, fx, u, fu
		} else {
			if u < x {
				a = u
			} else {
				b = u
			}
			if fu <= fw || w == x {
				v, fv, w, fw = w, fw, u, fu
			} else if fu <= fv || v == x || v == w {
				v, fv = u, fu
			}
		}
	}
	return x
}

// nelderMead minimises f from x0 with the simplex method of Nelder and Mead
// (1965) in the standard form of Lagarias et al. (1998, SIAM J. Optim.
// 9:112-147): reflection 1, expansion 2, contraction 1/2, shrink 1/2. It
// stops when the simplex's function values agree to ftol relative (and
// 1e-300 absolute) and its vertices to xtol, or after maxIter iterations.
func nelderMead(f func([]float64) float64, x0 []float64, step, ftol, xtol float64, maxIter int) ([]float64, float64) {
	d := len(x0)
	pts := make([][]float64, d+1)
	fv := make([]float64, d+1)
	for i := range pts {
		pts[i] = append([]float64(nil), x0...)
		if i > 0 {
			pts[i][i-1] += step
		}
		fv[i] = f(pts[i])
	}
	cen := make([]float64, d)
	try := func(a float64) ([]float64, float64) {
		x := make([]float64, d)
		w := pts[d]
		for j := range x {
			x[j] = cen[j] + a*(w[j]-cen[j])
		}
		return x, f(x)
	}
	for iter := 0; iter < maxIter; iter++ {
		// Order vertices by value.
		for i := 1; i <= d; i++ {
			for j := i; j > 0 && fv[j] < fv[j-1]; j-- {
				fv[j], fv[j-1] = fv[j-1], fv[j]
				pts[j], pts[j-1] = pts[j-1], pts[j]
			}
		}
		spread := 0.0
		for i := 1; i <= d; i++ {
			for j := range x0 {
				spread = math.Max(spread, math.Abs(pts[i][j]-pts[0][j]))
			}
		}
		if math.Abs(fv[d]-fv[0]) <= ftol*math.Abs(fv[0])+1e-300 && spread < xtol {
			break
		}
		for j := range cen {
			s := 0.0
			for i := 0; i < d; i++ {
				s += pts[i][j]
			}
			cen[j] = s / float64(d)
		}
		xr, fr := try(-1)
		switch {
		case fr < fv[0]:
			if xe, fe := try(-2); fe < fr {
				pts[d], fv[d] = xe, fe
			} else {
				pts[d], fv[d] = xr, fr
			}
		case fr < fv[d-1]:
			pts[d], fv[d] = xr, fr
		default:
			a := 0.5 // inside contraction
			if fr < fv[d] {
				a = -0.5 // outside contraction
			}
			xc, fc := try(a)
			if fc < math.Min(fr, fv[d]) {
				pts[d], fv[d] = xc, fc
				continue
			}
			for i := 1; i <= d; i++ {
				for j := range x0 {
					pts[i][j] = pts[0][j] + 0.5*(pts[i][j]-pts[0][j])
				}
				fv[i] = f(pts[i])
			}
		}
	}
	best := 0
	for i := range fv {
		if fv[i] < fv[best] {
			best = i
		}
	}
	return pts[best], fv[best]
}

// estimSpec says which models a fit considers.
type estimSpec struct {
	kind  NoiseKind
	order int // ar:P
	pmax  int // auto: AR orders 1..pmax, and ARMA(1,1)
	df    int // N = n - rank(X)
}

// modelChoice is a fitted model with its criterion.
type modelChoice struct {
	p      noiseParams
	sigma2 float64 // σ²(model) on the corrected autocovariances
	shrunk bool    // held inside the stationary region
}

// AIC returns N log σ² + 2 q.
func (m modelChoice) aic(df int) float64 {
	return float64(df)*math.Log(m.sigma2) + 2*float64(m.p.count())
}

// candidates returns every model the spec allows that g determines,
// fitted by minimising σ²(model).
func candidates(g []float64, spec estimSpec) []modelChoice {
	out := make([]modelChoice, 0, spec.pmax+2)
	maxAR := spec.order
	if spec.kind == NoiseAuto {
		maxAR = spec.pmax
	}
	// One recursion serves both: its first P steps are the AR(P) fits, and
	// where it stops short of the last lag g ceases to be positive definite
	// (which only ARMA(1,1) needs to know).
	last := len(g) - 1
	if spec.kind == NoiseAR {
		last = spec.order
	}
	coefs, vars := levinson(g, last)
	if spec.kind == NoiseAR || spec.kind == NoiseAuto {
		lo := 1
		if spec.kind == NoiseAR {
			lo = spec.order
		}
		for p := lo; p < len(coefs) && p <= maxAR; p++ {
			out = append(out, modelChoice{p: noiseParams{ar: coefs[p]}, sigma2: vars[p]})
		}
	}
	if spec.kind == NoiseARMA || spec.kind == NoiseAuto {
		// Only the lags over which g is positive definite determine a
		// model; beyond them the corrected values are noise.
		// At least lags 0..2 must be: ARMA(1,1) has two parameters (a
		// lag-1 autocorrelation beyond ±0.99 leaves the AR(1) fallback).
		gl := g
		if len(vars) < len(g) {
			gl = g[:len(vars)]
		}
		// (An empty gl, g_0 ≤ 0, happens when the first pass's truncated
		// correction of a short run overshoots; the fallback takes over.)
		if len(gl) < 3 {
			return out
		}
		if phi, th, v, ok := fitARMAWhittle(gl); ok {
			out = append(out, modelChoice{p: noiseParams{ar: []float64{phi}, ma: []float64{th}}, sigma2: v,
				shrunk: math.Abs(phi) >= armaLimit-1e-9 || math.Abs(th) >= armaLimit-1e-9})
		}
	}
	return out
}

// chooseModel fits the spec's models to corrected autocovariances and
// returns the one with the smallest AIC (the only one for a fixed model),
// except that auto prefers ARMA(1,1) within armaPreference of the best.
// When g determines none (an AR(P) beyond the stationary region, or g_0 ≤
// 0), the AR(P) coefficients are shrunk toward zero until stationary (see
// shrinkToStationary) and flagged.
func chooseModel(g []float64, spec estimSpec) modelChoice {
	cs := candidates(g, spec)
	if len(cs) == 0 {
		return fallbackModel(g, spec)
	}
	best := 0
	for i := range cs {
		if cs[i].aic(spec.df) < cs[best].aic(spec.df) {
			best = i
		}
	}
	for i := range cs {
		if cs[i].p.isARMA() && cs[i].aic(spec.df) <= cs[best].aic(spec.df)+armaPreference {
			return cs[i]
		}
	}
	return cs[best]
}

// armaPreference is the AIC margin within which auto takes AR(1) plus
// white noise (ARMA(1,1)) over a better-scoring AR(P): models within 2 AIC
// units are not distinguished by the data (Burnham and Anderson 2002,
// Model Selection and Multimodel Inference, §2.6), and between two such
// models the one that holds a white component keeps the nominal
// false-positive rate where AR(P) of low order under-whitens (METHODS.md;
// measured in docs/calibration.md).
const armaPreference = 2.0

func fallbackModel(g []float64, spec estimSpec) modelChoice {
	switch spec.kind {
	case NoiseARMA:
		// g is not positive definite even at lag 1: the lag-1
		// autocorrelation is beyond ±0.99.
		phi := stationaryLimit
		if g[0] > 0 && g[1] < 0 {
			phi = -stationaryLimit
		}
		return modelChoice{p: noiseParams{ar: []float64{phi}, ma: []float64{0}}, sigma2: math.NaN(), shrunk: true}
	}
	P := spec.order
	if spec.kind == NoiseAuto {
		P = 1
	}
	a := make([]float64, P)
	if g[0] > 0 {
		a, _ = YuleWalker(g[:P+1])
		shrinkToStationary(a)
	}
	return modelChoice{p: noiseParams{ar: a}, sigma2: math.NaN(), shrunk: true}
}

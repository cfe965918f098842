package fit

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// NoiseKind is the family of a noise model.
type NoiseKind int

// Noise model families.
const (
	// NoiseUnset is the zero value: the kind follows from Name (or Order,
	// when Name is empty), see Resolve.
	NoiseUnset NoiseKind = iota
	NoiseOLS             // ordinary least squares
	NoiseAR              // AR(P), P fixed
	NoiseARMA            // ARMA(1,1) (AR(1) plus white noise) by REML
	NoiseAuto            // per region the AIC choice among AR(1..Pmax) and ARMA(1,1)
)

// NoiseModel is the temporal noise model of a fit: ordinary least squares,
// a stationary AR(P) process
//
//	e_t = a_1 e_{t-1} + ... + a_P e_{t-P} + u_t,
//
// an ARMA(1,1) process e_t = φ e_{t-1} + u_t + θ u_{t-1} (which holds AR(1)
// plus white noise), or the per-region choice among them (auto), with
// parameters estimated per region, or once per run from all regions when
// Pool is set.
type NoiseModel struct {
	Name  string // as given on the command line: none, ar1, ar:P, arma, auto
	Kind  NoiseKind
	Order int // P for ar1 and ar:P
	// MaxOrder is Pmax for auto, set from the repetition time by ForTR.
	MaxOrder int
	Pool     bool // one model per run from the averaged autocorrelation of all regions
}

// MaxAROrder is the largest P accepted by --noise ar:P, and the largest
// order auto considers.
const MaxAROrder = 8

// DefaultNoise is the --noise default.
const DefaultNoise = "auto"

// ParseNoise reads a --noise value: none, ar1, ar:P with P in 1..8, arma or
// auto (also the empty string).
func ParseNoise(s string) (NoiseModel, error) {
	switch {
	case s == "none":
		return NoiseModel{Name: s, Kind: NoiseOLS}, nil
	case s == "ar1":
		return NoiseModel{Name: s, Kind: NoiseAR, Order: 1}, nil
	case s == "arma":
		return NoiseModel{Name: s, Kind: NoiseARMA}, nil
	case s == "auto" || s == "":
		return NoiseModel{Name: "auto", Kind: NoiseAuto}, nil
	case strings.HasPrefix(s, "ar:"):
		p, err := strconv.Atoi(s[3:])
		if err == nil && p >= 1 && p <= MaxAROrder {
			return NoiseModel{Name: s, Kind: NoiseAR, Order: p}, nil
		}
	}
	return NoiseModel{}, fmt.Errorf("--noise %q: expected none, ar1, ar:P with P from 1 to %d, arma or auto", s, MaxAROrder)
}

// autoSpan is the stretch of time the AR orders considered by auto should
// cover: the autocorrelation of fMRI noise extends over several seconds, so
// the largest order is the number of volumes in about 7 s (6-8 s for most
// TRs).
const autoSpan = 7.0

// AutoMaxOrder returns Pmax for a repetition time of tr seconds:
// round(7 s / tr), at least 1 and at most MaxAROrder (8 at TR 0.8 s, 4 at
// 2 s, 2 at 3 s).
func AutoMaxOrder(tr float64) int {
	if !(tr > 0) {
		return MaxAROrder
	}
	return max(1, min(MaxAROrder, int(math.Round(autoSpan/tr))))
}

// Resolve fills Kind for a model written as a literal with only Name and
// Order: a known Name is parsed; otherwise Order > 0 is AR(Order) and 0
// ordinary least squares.
func (m NoiseModel) Resolve() NoiseModel {
	if m.Kind != NoiseUnset {
		return m
	}
	if p, err := ParseNoise(m.Name); err == nil && m.Name != "" {
		p.MaxOrder, p.Pool = m.MaxOrder, m.Pool
		return p
	}
	switch {
	case m.Order == 1:
		m.Kind, m.Name = NoiseAR, "ar1"
	case m.Order > 1:
		m.Kind, m.Name = NoiseAR, fmt.Sprintf("ar:%d", m.Order)
	default:
		m.Kind, m.Name = NoiseOLS, "none"
	}
	return m
}

// ForTR returns the model with Pmax set for repetition time tr (a no-op
// for models other than auto).
func (m NoiseModel) ForTR(tr float64) NoiseModel {
	if m.Kind == NoiseAuto {
		m.MaxOrder = AutoMaxOrder(tr)
	}
	return m
}

// ARAutocovariance returns g_0..g_P, the autocovariances of the stationary
// AR(P) process with coefficients a and unit innovation variance, the
// solution of the Yule-Walker equations
//
//	g_k = sum_i a_i g_|k-i|  (k = 1..P),   g_0 = sum_i a_i g_i + 1
//
// (Box, Jenkins and Reinsel 2008, §3.2). They are computed through the
// reflection coefficients κ_p (the step-down recursion of a), which give
// the autocorrelations order by order, ρ_p = κ_p v_{p-1} + sum_{i<p}
// a^{(p-1)}_i ρ_{p-i} with v_p = prod_{i≤p} (1 - κ_i²), and g_0 = 1/v_P. ok
// is false outside the stationary region (some |κ_p| ≥ 1).
func ARAutocovariance(a []float64) (g []float64, ok bool) {
	p := len(a)
	// Step-down: reflection coefficients and the lower-order models.
	models := make([][]float64, p+1)
	models[p] = append([]float64(nil), a...)
	kappa := make([]float64, p+1)
	for k := p; k >= 1; k-- {
		b := models[k]
		kp := b[k-1]
		if !(math.Abs(kp) < 1) {
			return nil, false
		}
		kappa[k] = kp
		d := 1 - kp*kp
		nb := make([]float64, k-1)
		for i := 1; i < k; i++ {
			nb[i-1] = (b[i-1] + kp*b[k-i-1]) / d
		}
		models[k-1] = nb
	}
	rho := make([]float64, p+1)
	rho[0] = 1
	v := 1.0
	for k := 1; k <= p; k++ {
		s := kappa[k] * v
		prev := models[k-1]
		for i := 1; i < k; i++ {
			s += prev[i-1] * rho[k-i]
		}
		rho[k] = s
		v *= 1 - kappa[k]*kappa[k]
	}
	g = make([]float64, p+1)
	for k := range g {
		g[k] = rho[k] / v
	}
	return g, g[0] > 0 && !math.IsNaN(g[0])
}

// YuleWalker returns the AR(P) coefficients whose autocovariances are
// g_0..g_P, by the Levinson-Durbin recursion, and the reflection
// (partial autocorrelation) coefficients met on the way. ok is false when
// g is not positive definite (some |reflection| >= 1), in which case a is
// not a stationary model.
func YuleWalker(g []float64) (a []float64, ok bool) {
	p := len(g) - 1
	if g[0] <= 0 {
		return make([]float64, p), false
	}
	a = make([]float64, p)
	prev := make([]float64, p)
	v := g[0]
	ok = true
	for k := 1; k <= p; k++ {
		acc := g[k]
		for i := 1; i < k; i++ {
			acc -= prev[i-1] * g[k-i]
		}
		kappa := acc / v
		if math.Abs(kappa) >= 1 || math.IsNaN(kappa) {
			ok = false
		}
		a[k-1] = kappa
		for i := 1; i < k; i++ {
			a[i-1] = prev[i-1] - kappa*prev[k-i-1]
		}
		v *= 1 - kappa*kappa
		copy(prev, a)
	}
	return a, ok
}

// Stationary reports whether the AR polynomial 1 - a_1 z - ... - a_P z^P
// has all its roots outside the unit circle, by the step-down recursion
// (every reflection coefficient strictly inside (-1, 1)).
func Stationary(a []float64) bool {
	b := append([]float64(nil), a...)
	for k := len(b); k >= 1; k-- {
		kappa := b[k-1]
		if math.Abs(kappa) >= 1 || math.IsNaN(kappa) {
			return false
		}
		d := 1 - kappa*kappa
		nb := make([]float64, k-1)
		for i := 1; i < k; i++ {
			nb[i-1] = (b[i-1] + kappa*b[k-i-1]) / d
		}
		b = nb
	}
	return true
}

// stationaryLimit bounds how close to the unit circle an estimated model may
// come: the largest reflection coefficient kept is 0.99, beyond which the
// whitening of the first P volumes is numerically unstable.
const stationaryLimit = 0.99

// shrinkToStationary scales a_i by s^i (which moves every root of the AR
// polynomial outward by 1/s) until the model is stationary with all
// reflection coefficients within stationaryLimit. It reports whether it had
// to change a.
func shrinkToStationary(a []float64) bool {
	changed := false
	for iter := 0; iter < 200 && !stationaryWithin(a, stationaryLimit); iter++ {
		s := 0.95
		f := s
		for i := range a {
			a[i] *= f
			f *= s
		}
		changed = true
	}
	if !stationaryWithin(a, stationaryLimit) {
		for i := range a {
			a[i] = 0
		}
	}
	return changed
}

func stationaryWithin(a []float64, limit float64) bool {
	b := append([]float64(nil), a...)
	for k := len(b); k >= 1; k-- {
		kappa := b[k-1]
		if math.Abs(kappa) > limit || math.IsNaN(kappa) {
			return false
		}
		d := 1 - kappa*kappa
		nb := make([]float64, k-1)
		for i := 1; i < k; i++ {
			nb[i-1] = (b[i-1] + kappa*b[k-i-1]) / d
		}
		b = nb
	}
	return true
}

// Whitener applies the exact whitening transform of a stationary AR(P)
// process (unit innovation variance), every volume kept:
//
//	z_t = e_t - sum_i a_i e_{t-i}        for t >= P (0-based),
//	z_{0..P-1} = L^-1 e_{0..P-1},        L L' = G,
//
// where G is the P×P Toeplitz matrix of the autocovariances g_0..g_{P-1}.
// Then z has covariance I, so least squares on whitened data is the exact
// GLS solution. For P = 1 the first row is the Prais-Winsten row
// z_0 = sqrt(1 - a_1²) e_0 (Prais and Winsten 1954).
type Whitener struct {
	A    []float64
	linv *mat.TriDense // L^-1, P×P lower triangular; nil for P = 0
	G0   float64       // g_0, the marginal variance per unit innovation variance
	// LogDet is log|V| per unit innovation variance, = log|G| = 2 sum
	// log L_ii (the rows t ≥ P have unit variance), whatever the length.
	LogDet float64
}

// NewWhitener prepares the transform for coefficients a, which must be
// stationary.
func NewWhitener(a []float64) (*Whitener, error) {
	w := &Whitener{A: append([]float64(nil), a...), G0: 1}
	p := len(a)
	if p == 0 {
		return w, nil
	}
	g, ok := ARAutocovariance(a)
	if !ok || !Stationary(a) {
		return nil, fmt.Errorf("AR coefficients %v are not stationary", a)
	}
	w.G0 = g[0]
	G := mat.NewSymDense(p, nil)
	for i := 0; i < p; i++ {
		for j := i; j < p; j++ {
			G.SetSym(i, j, g[j-i])
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(G) {
		return nil, fmt.Errorf("AR coefficients %v give a covariance that is not positive definite", a)
	}
	var l mat.TriDense
	ch.LTo(&l)
	for i := 0; i < p; i++ {
		w.LogDet += 2 * math.Log(l.At(i, i))
	}
	w.linv = mat.NewTriDense(p, mat.Lower, nil)
	if err := w.linv.InverseTri(&l); err != nil {
		return nil, err
	}
	return w, nil
}

// Apply writes the whitened series of src into dst (same length; may not
// alias).
func (w *Whitener) Apply(dst, src []float64) {
	p := len(w.A)
	n := len(src)
	if p == 0 {
		copy(dst, src)
		return
	}
	for t := 0; t < p && t < n; t++ {
		s := 0.0
		for j := 0; j <= t; j++ {
			s += w.linv.At(t, j) * src[j]
		}
		dst[t] = s
	}
	for t := p; t < n; t++ {
		s := src[t]
		for i, ai := range w.A {
			s -= ai * src[t-1-i]
		}
		dst[t] = s
	}
}

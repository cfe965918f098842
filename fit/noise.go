package fit

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// NoiseModel is the temporal noise model of a fit: Order 0 is ordinary
// least squares; Order P > 0 is a stationary AR(P) process
//
//	e_t = a_1 e_{t-1} + ... + a_P e_{t-P} + u_t,
//
// with coefficients estimated per region.
type NoiseModel struct {
	Name  string // as given on the command line: none, ar1, ar:P
	Order int
}

// MaxAROrder is the largest P accepted by --noise ar:P.
const MaxAROrder = 8

// ParseNoise reads a --noise value: none, ar1 or ar:P with P in 1..8.
func ParseNoise(s string) (NoiseModel, error) {
	switch {
	case s == "none":
		return NoiseModel{Name: s}, nil
	case s == "ar1":
		return NoiseModel{Name: s, Order: 1}, nil
	case strings.HasPrefix(s, "ar:"):
		p, err := strconv.Atoi(s[3:])
		if err == nil && p >= 1 && p <= MaxAROrder {
			return NoiseModel{Name: s, Order: p}, nil
		}
	}
	return NoiseModel{}, fmt.Errorf("--noise %q: expected none, ar1 or ar:P with P from 1 to %d", s, MaxAROrder)
}

// ARAutocovariance returns g_0..g_P, the autocovariances of the stationary
// AR(P) process with coefficients a and unit innovation variance, from the
// Yule-Walker equations
//
//	g_k = sum_i a_i g_|k-i|  (k = 1..P),   g_0 = sum_i a_i g_i + 1
//
// (Box, Jenkins and Reinsel 2008, §3.2). ok is false when the system is
// singular or g_0 <= 0, which happens only outside the stationary region.
func ARAutocovariance(a []float64) (g []float64, ok bool) {
	p := len(a)
	m := mat.NewDense(p+1, p+1, nil)
	rhs := mat.NewVecDense(p+1, nil)
	rhs.SetVec(0, 1)
	for k := 0; k <= p; k++ {
		m.Set(k, k, m.At(k, k)+1)
		for i := 1; i <= p; i++ {
			lag := k - i
			if lag < 0 {
				lag = -lag
			}
			m.Set(k, lag, m.At(k, lag)-a[i-1])
		}
	}
	var sol mat.VecDense
	if err := sol.SolveVec(m, rhs); err != nil {
		return nil, false
	}
	g = make([]float64, p+1)
	for k := range g {
		g[k] = sol.AtVec(k)
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

// ResidualBias holds what the bias correction of residual autocovariances
// needs from one design: the matrix M with
//
//	M_jk = w_k tr(R D_j R D_k),  j, k = 0..P,  w_0 = 1, w_k = 2,
//
// where R = I - X X⁺ forms residuals and D_j is the symmetric lag-j matrix
// (½ on the ±j diagonals, D_0 = I). Worsley et al. (2002, NeuroImage
// 15:1-15) show E[r'D_j r] = tr(R D_j R V); with V truncated at lag P,
// V ≈ sum_k w_k g_k D_k, so the observed lag sums c_j = r'D_j r satisfy
// E[c] ≈ M g and the corrected autocovariances are g = M^-1 c. M depends on
// the design alone, so it is computed once per run and shared by all regions.
type ResidualBias struct {
	P  int
	m  mat.Dense // LU-solvable (P+1)×(P+1)
	lu mat.LU
}

// NewResidualBias computes M for the design x (n×k) and order p, in
// O(p² n²) after forming R explicitly from a thin QR.
func NewResidualBias(x *mat.Dense, p int) *ResidualBias {
	n, k := x.Dims()
	var qr mat.QR
	qr.Factorize(x)
	var q mat.Dense
	qr.QTo(&q)
	qk := q.Slice(0, n, 0, k)
	r := mat.NewDense(n, n, nil)
	r.Mul(qk, qk.T())
	r.Scale(-1, r)
	for i := 0; i < n; i++ {
		r.Set(i, i, r.At(i, i)+1)
	}
	rr := r.RawMatrix()
	at := func(i, j int) float64 {
		if i < 0 || j < 0 || i >= n || j >= n {
			return 0
		}
		return rr.Data[i*rr.Stride+j]
	}
	// (R D_j)_{ab} = ½(R_{a,b-j} + R_{a,b+j}) for j > 0; R for j = 0.
	rdj := func(a, b, j int) float64 {
		if j == 0 {
			return at(a, b)
		}
		return 0.5 * (at(a, b-j) + at(a, b+j))
	}
	tr := mat.NewDense(p+1, p+1, nil)
	for j := 0; j <= p; j++ {
		for kk := j; kk <= p; kk++ {
			s := 0.0
			// tr(R D_j R D_k) = sum_ab (R D_j)_{ab} (R D_k)_{ba}.
			for a := 0; a < n; a++ {
				for b := 0; b < n; b++ {
					s += rdj(a, b, j) * rdj(b, a, kk)
				}
			}
			tr.Set(j, kk, s)
			tr.Set(kk, j, s)
		}
	}
	rb := &ResidualBias{P: p}
	rb.m.ReuseAs(p+1, p+1)
	for j := 0; j <= p; j++ {
		for kk := 0; kk <= p; kk++ {
			w := 2.0
			if kk == 0 {
				w = 1
			}
			rb.m.Set(j, kk, w*tr.At(j, kk))
		}
	}
	rb.lu.Factorize(&rb.m)
	return rb
}

// LagSums returns c_j = sum_t r_t r_{t+j} = r'D_j r for j = 0..p.
func LagSums(r []float64, p int) []float64 {
	c := make([]float64, p+1)
	for j := 0; j <= p; j++ {
		s := 0.0
		for t := 0; t+j < len(r); t++ {
			s += r[t] * r[t+j]
		}
		c[j] = s
	}
	return c
}

// Estimate returns bias-corrected AR(P) coefficients from residuals r of a
// fit of this design: corrected autocovariances g = M^-1 c, then
// Yule-Walker. The result is kept inside the stationary region (shrunk
// toward zero, see shrinkToStationary); shrunk reports whether that was
// needed.
func (rb *ResidualBias) Estimate(r []float64) (a []float64, shrunk bool) {
	c := LagSums(r, rb.P)
	var g mat.VecDense
	if err := rb.lu.SolveVecTo(&g, false, mat.NewVecDense(len(c), c)); err != nil || g.AtVec(0) <= 0 {
		return make([]float64, rb.P), true
	}
	gs := make([]float64, rb.P+1)
	for i := range gs {
		gs[i] = g.AtVec(i)
	}
	a, ok := YuleWalker(gs)
	if !ok {
		shrunk = true
	}
	if shrinkToStationary(a) {
		shrunk = true
	}
	return a, shrunk
}

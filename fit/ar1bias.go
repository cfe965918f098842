package fit

import (
	"gonum.org/v1/gonum/mat"
)

// ar1Lags is how many lags of the AR(1) covariance enter the expected
// residual lag sums: ρ^64 < 1.2e-3 at ρ = 0.9 and < 1e-12 at ρ = 0.65, so
// the truncation moves the corrected ρ by far less than its sampling error.
const ar1Lags = 64

// AR1Bias corrects the AR(1) coefficient estimated from residuals with the
// full AR(1) covariance, not a truncated one (Worsley et al. 2002,
// NeuroImage 15:1-15). With R = I - H the residual-forming matrix of the
// design, D_k the symmetric lag-k matrix and V(ρ) = sum_k w_k ρ^k D_k
// (w_0 = 1, w_k = 2; the AR(1) correlation matrix), the expected lag sums are
//
//	E[r'r]     = tr(R V(ρ))       = sum_k w_k ρ^k m0_k,  m0_k = tr(R D_k),
//	E[r'D_1 r] = tr(R D_1 R V(ρ)) = sum_k w_k ρ^k m1_k,  m1_k = tr(R D_1 R D_k),
//
// and the corrected ρ solves E[r'D_1 r] / E[r'r] = r'D_1 r / r'r by
// bisection (the ratio increases with ρ). The m's depend on the design
// alone and are computed once per run from a thin QR, X = QR, H = QQ':
//
//	m1_k = tr(D_1 D_k) - tr(H D_1 D_k) - tr(H D_k D_1) + tr(Q'D_1Q · Q'D_kQ),
//
// in O(K n p²) for K lags and p terms.
type AR1Bias struct {
	m0, m1 []float64
}

// applyLag writes D_k x into dst for every column of x (n×p):
// (D_k x)_t = ½ (x_{t-k} + x_{t+k}), zero beyond the ends; D_0 x = x.
func applyLag(dst, x *mat.Dense, k int) {
	n, p := x.Dims()
	if k == 0 {
		dst.Copy(x)
		return
	}
	dst.Zero()
	for t := 0; t < n; t++ {
		row := dst.RawRowView(t)
		if t-k >= 0 {
			src := x.RawRowView(t - k)
			for j := 0; j < p; j++ {
				row[j] += 0.5 * src[j]
			}
		}
		if t+k < n {
			src := x.RawRowView(t + k)
			for j := 0; j < p; j++ {
				row[j] += 0.5 * src[j]
			}
		}
	}
}

// NewAR1Bias prepares the correction for design x.
func NewAR1Bias(x *mat.Dense) *AR1Bias {
	n, p := x.Dims()
	var qr mat.QR
	qr.Factorize(x)
	var qf mat.Dense
	qr.QTo(&qf)
	q := mat.DenseCopyOf(qf.Slice(0, n, 0, p))
	K := min(ar1Lags, n-1)
	b := &AR1Bias{m0: make([]float64, K+1), m1: make([]float64, K+1)}
	d1q := mat.NewDense(n, p, nil)
	applyLag(d1q, q, 1)
	var a mat.Dense // Q' D_1 Q
	a.Mul(q.T(), d1q)
	dkq := mat.NewDense(n, p, nil)
	tmp := mat.NewDense(n, p, nil)
	var bk mat.Dense
	for k := 0; k <= K; k++ {
		applyLag(dkq, q, k)
		// m0_k = tr(D_k) - tr(Q' D_k Q).
		trHDk := frob(q, dkq)
		if k == 0 {
			b.m0[k] = float64(n) - trHDk
		} else {
			b.m0[k] = -trHDk
		}
		// tr(D_1 D_k): only k = 1 has a diagonal, (n-1)/2.
		t1 := 0.0
		if k == 1 {
			t1 = float64(n-1) / 2
		}
		applyLag(tmp, dkq, 1) // D_1 D_k Q
		t2 := frob(q, tmp)
		applyLag(tmp, d1q, k) // D_k D_1 Q
		t3 := frob(q, tmp)
		bk.Mul(q.T(), dkq) // Q' D_k Q
		t4 := 0.0
		for i := 0; i < p; i++ {
			for j := 0; j < p; j++ {
				t4 += a.At(i, j) * bk.At(j, i)
			}
		}
		b.m1[k] = t1 - t2 - t3 + t4
	}
	return b
}

// frob returns sum_ij a_ij b_ij = tr(a'b).
func frob(a, b *mat.Dense) float64 {
	ra, rb := a.RawMatrix(), b.RawMatrix()
	n, p := a.Dims()
	s := 0.0
	for i := 0; i < n; i++ {
		x := ra.Data[i*ra.Stride : i*ra.Stride+p]
		y := rb.Data[i*rb.Stride : i*rb.Stride+p]
		for j := range x {
			s += x[j] * y[j]
		}
	}
	return s
}

// expectedRatio is E[r'D_1 r] / E[r'r] under AR(1) coefficient rho.
func (b *AR1Bias) expectedRatio(rho float64) float64 {
	num, den := b.m1[0], b.m0[0]
	f := 1.0
	for k := 1; k < len(b.m0); k++ {
		f *= rho
		num += 2 * f * b.m1[k]
		den += 2 * f * b.m0[k]
	}
	return num / den
}

// Estimate returns the corrected coefficient for residuals r, within
// ±stationaryLimit; shrunk is true when the observed ratio lies beyond what
// any coefficient in that range explains and the estimate was held at the
// limit.
func (b *AR1Bias) Estimate(r []float64) (rho float64, shrunk bool) {
	c := LagSums(r, 1)
	if c[0] <= 0 {
		return 0, true
	}
	obs := c[1] / c[0]
	lo, hi := -stationaryLimit, stationaryLimit
	if obs <= b.expectedRatio(lo) {
		return lo, true
	}
	if obs >= b.expectedRatio(hi) {
		return hi, true
	}
	for i := 0; i < 60 && hi-lo > 1e-12; i++ {
		mid := 0.5 * (lo + hi)
		if b.expectedRatio(mid) < obs {
			lo = mid
		} else {
			hi = mid
		}
	}
	return 0.5 * (lo + hi), false
}

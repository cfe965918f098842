package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
	"gonum.org/v1/gonum/mat"
)

// fastPathCondition is the condition number of the equilibrated design
// below which the many-regions path solves the GLS normal equations: they
// are formed in the orthonormal basis Q of the design (X = QR), where
// Q'V^-1Q has the condition number of V alone, and R enters only through
// triangular solves, so the accuracy is that of QR up to this bound (checked
// against per-region QR in TestFastPathAgreesWithQR). Above it every region
// is fitted by its own QR of the whitened design.
const fastPathCondition = 1e4

// runBasis is what every region of a run shares: the thin QR of the design,
// X = Q R with Q'Q = I, and the lagged cross-products of Q,
//
//	lag_d = K_d + K_d',  K_d = sum_t q_t q_{t+d}'  (q_t the t-th row of Q),
//
// so that Q'D_dQ = lag_d / 2 for the symmetric lag-d matrix D_d and, for any
// Toeplitz matrix, Q'Toep(v)Q = v_0 I + sum_d v_d lag_d (METHODS.md, "Many
// regions, one design": computed once per run, O(D n k²)).
type runBasis struct {
	n, k int
	q    []float64 // n×k, row-major
	// qt is Q' (k×n, row-major): the products that sum over volumes
	// (Q'y, the lagged cross-products) run as dot products along its
	// contiguous rows, measured 1.5 to 5 times faster in gonum than the
	// same products over the rows of Q, which are only k long, and the
	// product Q δ runs along them too (residBatch).
	qt   []float64
	r    []float64   // k×k upper triangular
	rinv []float64   // R^-1, upper triangular
	cond float64     // condition number of the design with unit-length columns
	fast bool        // cond < fastPathCondition
	lag  [][]float64 // lag[d], k×k, d ≥ 1; lag[0] is nil (K_0 = I)
	// lagPacked holds the lower triangles of lag_1, lag_2, ... packed row
	// by row (k(k+1)/2 entries each, entry (i, j ≤ i) at i(i+1)/2 + j), one
	// lag after another, so that sum_d v_d lag_d is one matrix-vector
	// product.
	lagPacked []float64
}

// packedSize is k(k+1)/2, the entries of a packed lower triangle.
func packedSize(k int) int { return k * (k + 1) / 2 }

// newRunBasis factorises the design: Householder QR of the equilibrated
// columns (LAPACK dgeqrf/dorgqr), R rescaled to the original columns.
func newRunBasis(x *mat.Dense) (*runBasis, error) {
	n, k := x.Dims()
	if n <= k {
		return nil, fmt.Errorf("%d observations cannot estimate %d terms", n, k)
	}
	b := &runBasis{n: n, k: k, q: make([]float64, n*k)}
	norms := make([]float64, k)
	for j := 0; j < k; j++ {
		s := 0.0
		for t := 0; t < n; t++ {
			v := x.At(t, j)
			s += v * v
		}
		norms[j] = math.Sqrt(s)
		if norms[j] == 0 {
			return nil, fmt.Errorf("design is rank-deficient at column %d", j+1)
		}
	}
	for t := 0; t < n; t++ {
		for j := 0; j < k; j++ {
			b.q[t*k+j] = x.At(t, j) / norms[j]
		}
	}
	a := blas64.General{Rows: n, Cols: k, Stride: k, Data: b.q}
	tau := make([]float64, k)
	work := make([]float64, 1)
	lapack64.Geqrf(a, tau, work, -1)
	work = make([]float64, int(work[0]))
	lapack64.Geqrf(a, tau, work, len(work))
	req := mat.NewDense(k, k, nil)
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			req.Set(i, j, b.q[i*k+j])
		}
	}
	work = make([]float64, 1)
	lapack64.Orgqr(a, tau, work, -1)
	work = make([]float64, int(work[0]))
	lapack64.Orgqr(a, tau, work, len(work))

	b.qt = make([]float64, k*n)
	for t := 0; t < n; t++ {
		for j := 0; j < k; j++ {
			b.qt[j*n+t] = b.q[t*k+j]
		}
	}
	if err := checkFullRank(req, n, k); err != nil {
		return nil, err
	}
	var svd mat.SVD
	if !svd.Factorize(req, mat.SVDNone) {
		return nil, fmt.Errorf("design: singular value decomposition failed")
	}
	sv := svd.Values(nil)
	b.cond = sv[0] / sv[len(sv)-1]
	b.fast = b.cond < fastPathCondition

	b.r = make([]float64, k*k)
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			b.r[i*k+j] = req.At(i, j) * norms[j]
		}
	}
	b.rinv = make([]float64, k*k)
	for j := k - 1; j >= 0; j-- {
		b.rinv[j*k+j] = 1 / b.r[j*k+j]
		for i := j - 1; i >= 0; i-- {
			s := 0.0
			for p := i + 1; p <= j; p++ {
				s += b.r[i*k+p] * b.rinv[p*k+j]
			}
			b.rinv[i*k+j] = -s / b.r[i*k+i]
		}
	}
	b.lag = [][]float64{nil}
	return b, nil
}

// ensureLags computes lag_d up to d = D (at most n-1).
func (b *runBasis) ensureLags(D int) {
	n, k := b.n, b.k
	D = min(D, n-1)
	for d := len(b.lag); d <= D; d++ {
		kd := make([]float64, k*k)
		// K_d[i][j] = sum_t q_{t,i} q_{t+d,j}: rows of Q' against the
		// same rows shifted by d, k² dot products of length n - d (vdot's
		// kernel measured faster than gonum's matrix product, whose
		// kernel is the SSE2 dot product).
		for i := 0; i < k; i++ {
			lo := b.qt[i*n : i*n+n-d]
			for j := 0; j < k; j++ {
				kd[i*k+j] = vdot(lo, b.qt[j*n+d:(j+1)*n])
			}
		}
		for i := 0; i < k; i++ {
			for j := i; j < k; j++ {
				s := kd[i*k+j] + kd[j*k+i]
				kd[i*k+j], kd[j*k+i] = s, s
			}
		}
		b.lag = append(b.lag, kd)
		for i := 0; i < k; i++ {
			b.lagPacked = append(b.lagPacked, kd[i*k:i*k+i+1]...)
		}
	}
}

// qrow is the t-th row of Q.
func (b *runBasis) qrow(t int) []float64 { return b.q[t*b.k : (t+1)*b.k] }

// beta returns R^-1 γ: the coefficients of the design's own columns from
// those of Q.
func (b *runBasis) beta(gamma []float64) []float64 {
	k := b.k
	beta := make([]float64, k)
	for i := 0; i < k; i++ {
		s := 0.0
		for j := i; j < k; j++ {
			s += b.rinv[i*k+j] * gamma[j]
		}
		beta[i] = s
	}
	return beta
}

// covFactor returns the packed upper-triangular G = R^-1 U from U = W' =
// (L^-1)' (A = L L', U upper triangular, as cholInverse leaves it), so that
// R^-1 A^-1 R^-T = G G': the covariance of β per unit variance, as
// RegionFit holds it. G_ij = sum_{p=i..j} (R^-1)_ip W_jp is a dot product
// of row i of R^-1 and row j of W (W, lower triangular, is U transposed
// into scratch, k×k), four j at a time: W is zero beyond its diagonal, so
// the four sums may all run to the last of their ends. k³/6 in all.
func (b *runBasis) covFactor(u, scratch []float64) []float64 {
	k := b.k
	w := scratch[:k*k]
	for j := 0; j < k; j++ {
		row := w[j*k : (j+1)*k]
		for p := range row[:j+1] {
			row[p] = u[p*k+j]
		}
		clear(row[j+1:])
	}
	g := make([]float64, packedSize(k))
	for i := 0; i < k; i++ {
		ri := b.rinv[i*k : (i+1)*k]
		gi := g[packedRow(i, k):packedRow(i+1, k)] // G_ij at gi[j-i]
		j := i
		for ; j+4 <= k; j += 4 {
			s0, s1, s2, s3 := dot4(ri[i:j+4], w[j*k+i:], w[(j+1)*k+i:], w[(j+2)*k+i:], w[(j+3)*k+i:])
			gi[j-i], gi[j-i+1], gi[j-i+2], gi[j-i+3] = s0, s1, s2, s3
		}
		for ; j < k; j++ {
			gi[j-i] = sdot(ri[i:j+1], w[j*k+i:j*k+j+1])
		}
	}
	return g
}

// rinvFactor returns R^-1 packed: the covariance factor of OLS, (X'X)^-1 =
// R^-1 R^-T.
func (b *runBasis) rinvFactor() []float64 {
	k := b.k
	g := make([]float64, packedSize(k))
	for i := 0; i < k; i++ {
		copy(g[packedRow(i, k):packedRow(i+1, k)], b.rinv[i*k+i:(i+1)*k])
	}
	return g
}

// olsCorrection is the bias correction of autocovariances estimated from
// OLS residuals r = R y, R = I - QQ' (Worsley et al. 2002, NeuroImage
// 15:1-15): with the noise covariance truncated at lag L, V ≈ sum_k w_k g_k
// D_k (w_0 = 1, w_k = 2), the lag sums c_j = r'D_j r have expectation
//
//	E[c_j] = sum_k w_k g_k m_jk,   m_jk = tr(R D_j R D_k)
//	       = tr(D_j D_k) - 2 tr(Q'D_j D_k Q) + tr(Q'D_jQ · Q'D_kQ),
//
// with tr(D_j D_k) = n (j = k = 0), (n-j)/2 (j = k > 0), 0 otherwise. The
// (L+1)×(L+1) matrix depends on the design alone and is inverted once per
// run; the corrected autocovariances of a region are g = M^-1 c. This is the
// first pass only: later passes use the exact correction for GLS residuals
// (see correctGLS), so the truncation at L does not remain in the estimate.
//
// M is singular when the residuals cannot determine the autocovariances:
// fewer residual degrees of freedom than lags, or no pair of kept volumes at
// some lag. Rounding then leaves a condition number of 1e14 to 1e18, near
// the limit of double precision, where whether an inversion succeeds
// depends on the order of summation; runs that do determine them measured
// below 400 over the test suite. A condition number above
// maxCorrectionCond is taken as singular.
type olsCorrection struct {
	lags int
	minv []float64 // (L+1)×(L+1)
}

// maxCorrectionCond is the largest condition number of M accepted: g =
// M^-1 c amplifies the relative rounding of the lag sums (about 1e-16) by
// up to this factor, so the corrected autocovariances keep at least six
// significant digits.
const maxCorrectionCond = 1e10

func (b *runBasis) olsCorrection(L int) (*olsCorrection, error) {
	n, k := b.n, b.k
	b.ensureLags(L)
	L = min(L, len(b.lag)-1)
	trDD := b.lagProductTraces(L)
	// tr(Q'D_jQ · Q'D_kQ), Q'D_0Q = I, Q'D_jQ = lag_j/2.
	trKK := func(j, kk int) float64 {
		switch {
		case j == 0 && kk == 0:
			return float64(k)
		case j == 0:
			return traceOf(b.lag[kk], k) / 2
		case kk == 0:
			return traceOf(b.lag[j], k) / 2
		}
		return vdot(b.lag[j], b.lag[kk]) / 4
	}
	m := mat.NewDense(L+1, L+1, nil)
	for j := 0; j <= L; j++ {
		for kk := j; kk <= L; kk++ {
			tdd := 0.0
			switch {
			case j == 0 && kk == 0:
				tdd = float64(n)
			case j == kk:
				tdd = float64(n-j) / 2
			}
			v := tdd - 2*trDD(kk, j) + trKK(j, kk)
			wj, wk := 2.0, 2.0
			if j == 0 {
				wj = 1
			}
			if kk == 0 {
				wk = 1
			}
			m.Set(j, kk, wk*v)
			m.Set(kk, j, wj*v)
		}
	}
	var lu mat.LU
	lu.Factorize(m)
	if c := lu.Cond(); !(c <= maxCorrectionCond) {
		return nil, fmt.Errorf("bias correction of the noise model: condition number %.2g", c)
	}
	eye := mat.NewDiagDense(L+1, nil)
	for i := 0; i <= L; i++ {
		eye.SetDiag(i, 1)
	}
	var inv mat.Dense
	if err := lu.SolveTo(&inv, false, eye); err != nil {
		return nil, fmt.Errorf("bias correction of the noise model: %v", err)
	}
	c := &olsCorrection{lags: L, minv: make([]float64, (L+1)*(L+1))}
	for i := 0; i <= L; i++ {
		for j := 0; j <= L; j++ {
			c.minv[i*(L+1)+j] = inv.At(i, j)
		}
	}
	return c, nil
}

// lagProductTraces returns T(j, k) = tr(Q'D_jD_kQ) for 0 ≤ k ≤ j ≤ L
// (D_0 = I, D_j = (S_j + S_j')/2, S_j the shift by j: (S_j)_{t,u} = 1 for
// u = t + j). Products of shifts are shifts cut at the ends, S_jS_k =
// S_{j+k} and, for d = j - k ≥ 0, S_jS_k' and S_j'S_k are S_d without its
// last and its first k rows, so with h_d(t) = q_t'q_{t+d} and H_d =
// sum_{t=0..n-1-d} h_d(t) = tr(Q'S_dQ),
//
//	T(j, 0) = H_j,
//	T(j, k) = (2 H_{j+k} + 2 H_d - sum_{t=n-j..n-1-d} h_d(t) - sum_{t=0..k-1} h_d(t)) / 4,
//
// H_m = 0 for m ≥ n. The H_d are k dot products of length n - d along the
// rows of Q', the end pieces short dot products of rows of Q: O(L n k) in
// all, where forming D_jQ and their inner products costs O(L² n k)
// (TestLagProductTraces checks the two against each other).
func (b *runBasis) lagProductTraces(L int) func(j, k int) float64 {
	n, k := b.n, b.k
	H := make([]float64, 2*L+1)
	for d := range H {
		if d >= n {
			break
		}
		for i := 0; i < k; i++ {
			H[d] += vdot(b.qt[i*n:i*n+n-d], b.qt[i*n+d:(i+1)*n])
		}
	}
	h := func(d, t int) float64 { return vdot(b.qrow(t), b.qrow(t+d)) }
	return func(j, kk int) float64 {
		if kk == 0 {
			return H[j]
		}
		d := j - kk
		end, start := 0.0, 0.0
		for t := n - j; t <= n-1-d; t++ {
			end += h(d, t)
		}
		for t := 0; t < kk; t++ {
			start += h(d, t)
		}
		return (2*H[j+kk] + 2*H[d] - end - start) / 4
	}
}

func traceOf(a []float64, k int) float64 {
	s := 0.0
	for i := 0; i < k; i++ {
		s += a[i*k+i]
	}
	return s
}

// correct returns the corrected autocovariances M^-1 c.
func (c *olsCorrection) correct(dst, lagsum []float64) []float64 {
	L := c.lags
	dst = dst[:0]
	for i := 0; i <= L; i++ {
		dst = append(dst, vdot(c.minv[i*(L+1):(i+1)*(L+1)], lagsum[:L+1]))
	}
	return dst
}

// correctGLS returns corrected autocovariances from the lag sums c of GLS
// residuals r = y - Xβ̂, β̂ the GLS estimate under a covariance s²V_1
// (ainv is (Q'V_1^-1Q)^-1, k×k with both triangles filled). When
// V_1 is the noise's correlation, E[r r'] = s²V_1 - X Cov(β̂) X' exactly, so
//
//	E[c_j] = (n - j) g_j - s² tr((Q'V_1^-1 Q)^-1 Q'D_jQ),
//
// and g_j = (c_j + s² t_j) / (n - j). Iterating estimation and whitening
// makes this an unbiased estimating equation at its fixed point, with no
// truncation of V (the lag sums of the residuals of a fit of the design
// under the estimated covariance match their expectation under it).
func (b *runBasis) correctGLS(dst, lagsum, ainv []float64, s2 float64) []float64 {
	n, k := b.n, b.k
	dst = dst[:0]
	for j, c := range lagsum {
		var t float64
		if j == 0 {
			t = traceOf(ainv, k)
		} else {
			// tr(A^-1 lag_j)/2: both are symmetric and held in full, so
			// the trace of the product is half the sum of their
			// elementwise products, one dot product of length k².
			t = 0.5 * vdot(ainv[:k*k], b.lag[j])
		}
		dst = append(dst, (c+s2*t)/float64(n-j))
	}
	return dst
}

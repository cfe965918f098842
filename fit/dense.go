package fit

import (
	"math"

	"github.com/viterin/vek"
	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
)

// Small dense kernels on row-major k×k matrices held in []float64, for the
// per-region work of the many-regions path, where allocating gonum values
// for every region would cost more than the arithmetic.

// cholesky overwrites the lower triangle of a (k×k, symmetric, upper
// triangle ignored) with L, a = L L'. It reports false when a is not
// positive definite to working precision.
func cholesky(a []float64, k int) bool {
	for j := 0; j < k; j++ {
		rj := a[j*k : j*k+k]
		s := rj[j]
		for p := 0; p < j; p++ {
			s -= rj[p] * rj[p]
		}
		if !(s > 0) {
			return false
		}
		d := math.Sqrt(s)
		rj[j] = d
		for i := j + 1; i < k; i++ {
			ri := a[i*k : i*k+k]
			s := ri[j]
			for p := 0; p < j; p++ {
				s -= ri[p] * rj[p]
			}
			ri[j] = s / d
		}
	}
	return true
}

// cholLogDet is log|a| from its Cholesky factor.
func cholLogDet(l []float64, k int) float64 {
	s := 0.0
	for i := 0; i < k; i++ {
		s += math.Log(l[i*k+i])
	}
	return 2 * s
}

// cholSolve solves (L L') x = b in place.
func cholSolve(l []float64, k int, b []float64) {
	for i := 0; i < k; i++ {
		s := b[i]
		ri := l[i*k : i*k+i]
		for p, v := range ri {
			s -= v * b[p]
		}
		b[i] = s / l[i*k+i]
	}
	for i := k - 1; i >= 0; i-- {
		s := b[i]
		for p := i + 1; p < k; p++ {
			s -= l[p*k+i] * b[p]
		}
		b[i] = s / l[i*k+i]
	}
}

// cholInverse writes (L L')^-1 into inv (k×k, full) and W = L^-1 (lower
// triangular, row-major) into w: inv = W'W = sum_p w_p' w_p over the rows
// w_p of W. W is built row by row, w_i = (e_i - sum_{p<i} L_ip w_p) / L_ii;
// every inner loop runs along a row.
func cholInverse(l []float64, k int, inv, w []float64) {
	clear(w[:k*k])
	clear(inv[:k*k])
	for i := 0; i < k; i++ {
		wi := w[i*k : i*k+i+1]
		li := l[i*k : i*k+i]
		for p, c := range li {
			if c == 0 {
				continue
			}
			axpy(wi[:p+1], -c, w[p*k:p*k+p+1])
		}
		wi[i] = 1
		d := 1 / l[i*k+i]
		for j := range wi {
			wi[j] *= d
		}
		// Row i of W adds w_i' w_i to the lower triangle of inv.
		for a, va := range wi {
			if va != 0 {
				axpy(inv[a*k:a*k+a+1], va, wi[:a+1])
			}
		}
	}
	for a := 0; a < k; a++ {
		for b := a + 1; b < k; b++ {
			inv[a*k+b] = inv[b*k+a]
		}
	}
}

// axpy sets y += a x (len(y) = len(x)), unrolled by four. (gonum's
// assembly kernel, floats.AddScaled, measured no faster on the short rows
// it is used for.)
func axpy(y []float64, a float64, x []float64) {
	x = x[:len(y)]
	i := 0
	for ; i+3 < len(y); i += 4 {
		y[i] += a * x[i]
		y[i+1] += a * x[i+1]
		y[i+2] += a * x[i+2]
		y[i+3] += a * x[i+3]
	}
	for ; i < len(y); i++ {
		y[i] += a * x[i]
	}
}

// vdot returns sum x_i y_i (len(y) ≥ len(x)) with an assembly kernel:
// vek's AVX2 one from vekDotMin numbers on, gonum's (floats.Dot) below;
// against a Go loop with four accumulators gonum's alone made
// BenchmarkFitRunAuto 7% faster, measured alternately.
func vdot(x, y []float64) float64 {
	if len(x) >= vekDotMin {
		return vek.Dot(x, y[:len(x)])
	}
	return floats.Dot(x, y[:len(x)])
}

// vekDotMin is the length from which vek's AVX2 dot product (fused
// multiply-add on four lanes; pure Go where the processor lacks AVX2 or
// FMA) is used: measured twice as fast as gonum's SSE2 kernel on 600
// numbers, slower on 30, whose call cost dominates.
const vekDotMin = 64

// lagSums returns c_j = sum_t r_t r_{t+j} for j = 0..lags (lags < len(r)).
func lagSums(dst, r []float64, lags int) []float64 {
	dst = dst[:0]
	for j := 0; j <= lags; j++ {
		if j >= len(r) {
			dst = append(dst, 0)
			continue
		}
		dst = append(dst, vdot(r[:len(r)-j], r[j:]))
	}
	return dst
}

// upperFactor returns the packed upper-triangular U (row i holds columns
// i..k-1) with U U' = c, for c symmetric positive definite: the Cholesky
// factor L of c with rows and columns reversed, J c J = L L', gives
// c = (J L J)(J L J)' with J L J upper triangular. ok is false when c is
// not positive definite to working precision.
func upperFactor(c *mat.SymDense) (u []float64, ok bool) {
	k := c.SymmetricDim()
	a := make([]float64, k*k)
	for i := 0; i < k; i++ {
		for j := 0; j <= i; j++ {
			a[i*k+j] = c.At(k-1-i, k-1-j)
		}
	}
	if !cholesky(a, k) {
		return nil, false
	}
	u = make([]float64, packedSize(k))
	for i := 0; i < k; i++ {
		off := packedRow(i, k)
		for j := i; j < k; j++ {
			u[off+j-i] = a[(k-1-i)*k+(k-1-j)]
		}
	}
	return u, true
}

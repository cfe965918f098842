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
// positive definite to working precision. Column j (the Cholesky-Crout
// order) is L_jj = sqrt(a_jj - sum_{p<j} L_jp²), then L_ij = (a_ij -
// sum_{p<j} L_ip L_jp) / L_jj for i > j, four rows at a time against row j.
func cholesky(a []float64, k int) bool {
	for j := 0; j < k; j++ {
		rj := a[j*k : j*k+j] // L_j0 .. L_j,j-1
		s := a[j*k+j]
		for _, v := range rj {
			s -= v * v
		}
		if !(s > 0) {
			return false
		}
		d := math.Sqrt(s)
		a[j*k+j] = d
		n := len(rj)
		i := j + 1
		for ; i+4 <= k; i += 4 {
			r0 := a[i*k : i*k+j][:n]
			r1 := a[(i+1)*k : (i+1)*k+j][:n]
			r2 := a[(i+2)*k : (i+2)*k+j][:n]
			r3 := a[(i+3)*k : (i+3)*k+j][:n]
			s0, s1, s2, s3 := a[i*k+j], a[(i+1)*k+j], a[(i+2)*k+j], a[(i+3)*k+j]
			for p, c := range rj {
				s0 -= r0[p] * c
				s1 -= r1[p] * c
				s2 -= r2[p] * c
				s3 -= r3[p] * c
			}
			a[i*k+j], a[(i+1)*k+j], a[(i+2)*k+j], a[(i+3)*k+j] = s0/d, s1/d, s2/d, s3/d
		}
		for ; i < k; i++ {
			ri := a[i*k : i*k+j][:n]
			s := a[i*k+j]
			for p, c := range rj {
				s -= ri[p] * c
			}
			a[i*k+j] = s / d
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

// cholInverse writes (L L')^-1 into inv (k×k, full) and U = (L^-1)' into
// u (upper triangular, row-major: row j of U is column j of W = L^-1), by
// the column-oriented triangular inversion and product of LAPACK's dtrti2
// and dpotri:
//
//	W_jj = 1/L_jj,  W_ij = -(sum_{p=j..i-1} L_ip W_pj) / L_ii  (i > j),
//	(W'W)_ab = sum_{p ≥ max(a,b)} W_pa W_pb,
//
// with W_pj = U_jp, so that every sum runs along rows of L and U. The sums
// are taken four at a time (four rows of U against one row of L, one row
// of U against four others), which loads each shared number once for four
// products: a third of the instructions of one sum at a time, by callgrind.
func cholInverse(l []float64, k int, inv, u []float64) {
	clear(u[:k*k])
	for j0 := 0; j0 < k; j0 += 4 {
		m := min(4, k-j0)
		// The triangle of the block's own columns, one sum at a time.
		for i := j0; i < j0+m; i++ {
			u[i*k+i] = 1 / l[i*k+i]
			for r := j0; r < i; r++ {
				s := 0.0
				for p := r; p < i; p++ {
					s += l[i*k+p] * u[r*k+p]
				}
				u[r*k+i] = -s / l[i*k+i]
			}
		}
		for i := j0 + m; i < k; i++ {
			li := l[i*k+j0 : i*k+i]
			if m < 4 {
				for r := j0; r < j0+m; r++ {
					u[r*k+i] = -sdot(li, u[r*k+j0:r*k+i]) / l[i*k+i]
				}
				continue
			}
			// Rows j0..j0+3 of U are zero left of their diagonals, so all
			// four sums may start at column j0.
			s0, s1, s2, s3 := dot4(li, u[j0*k+j0:], u[(j0+1)*k+j0:], u[(j0+2)*k+j0:], u[(j0+3)*k+j0:])
			d := -1 / l[i*k+i]
			u[j0*k+i], u[(j0+1)*k+i], u[(j0+2)*k+i], u[(j0+3)*k+i] = s0*d, s1*d, s2*d, s3*d
		}
	}
	for a := 0; a < k; a++ {
		ua := u[a*k+a : (a+1)*k]
		b := 0
		for ; b+4 <= a+1; b += 4 {
			s0, s1, s2, s3 := dot4(ua, u[b*k+a:], u[(b+1)*k+a:], u[(b+2)*k+a:], u[(b+3)*k+a:])
			inv[a*k+b], inv[a*k+b+1], inv[a*k+b+2], inv[a*k+b+3] = s0, s1, s2, s3
			inv[b*k+a], inv[(b+1)*k+a], inv[(b+2)*k+a], inv[(b+3)*k+a] = s0, s1, s2, s3
		}
		for ; b <= a; b++ {
			v := sdot(ua, u[b*k+a:(b+1)*k])
			inv[a*k+b], inv[b*k+a] = v, v
		}
	}
}

// dot4 returns the four sums sum_p x_p y_m[p] (each len(y_m) ≥ len(x)):
// one row against four, each x_p loaded once for four products. The rows
// are cut to len(x), so that the compiler drops the bounds checks of the
// loop.
func dot4(x, y0, y1, y2, y3 []float64) (s0, s1, s2, s3 float64) {
	n := len(x)
	y0, y1, y2, y3 = y0[:n], y1[:n], y2[:n], y3[:n]
	for p, c := range x {
		s0 += c * y0[p]
		s1 += c * y1[p]
		s2 += c * y2[p]
		s3 += c * y3[p]
	}
	return
}

// sdot is sum x_i y_i (len(y) ≥ len(x)) for the short rows of k×k
// matrices, where an assembly kernel's call costs more than it saves.
func sdot(x, y []float64) float64 {
	y = y[:len(x)]
	s := 0.0
	for i, v := range x {
		s += v * y[i]
	}
	return s
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

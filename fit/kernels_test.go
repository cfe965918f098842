package fit

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestKernels checks the vector kernels the engine runs on (vdot, which
// switches between gonum's and vek's assembly at vekDotMin, and the
// batched products qtBatch and residBatch) against plain loops in the
// order of the formula, at lengths around the switch and around the
// kernels' unrolling widths (4 and 16), and at a batch that is not a
// multiple of batchRows. CI runs this package a second time with
// GODEBUG=cpu.avx2=off, which sends vek to its pure-Go code. Tolerance
// 1e-12 relative to sum |x_i y_i|: the kernels sum in another order, and
// reordering a sum of m terms moves it by at most about m·u times the sum
// of their magnitudes (Higham 2002, §3.1), 600·1.1e-16 ≈ 7e-14.
func TestKernels(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	vec := func(m int) []float64 {
		v := make([]float64, m)
		for i := range v {
			v[i] = rng.NormFloat64()
		}
		return v
	}
	check := func(what string, got, want, scale float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-12*scale {
			t.Errorf("%s: got %.17g, want %.17g", what, got, want)
		}
	}
	for _, m := range []int{1, 3, 4, 15, 16, 17, 63, 64, 65, 127, 600, 1201} {
		x, y := vec(m), vec(m+2) // y longer: vdot uses its first len(x)
		want, scale := 0.0, 0.0
		for i := range x {
			want += x[i] * y[i]
			scale += math.Abs(x[i] * y[i])
		}
		check("vdot", vdot(x, y), want, scale)
	}

	const n, k = 301, 7
	x := vec(n * k)
	for i := range x {
		if i%k == 0 {
			x[i] = 1 // a baseline column, as every design has
		}
	}
	b, err := newRunBasis(mat.NewDense(n, k, x))
	if err != nil {
		t.Fatal(err)
	}
	e := &engine{b: b}
	ws := make([]*regionWork, batchRows+5)
	for i := range ws {
		ws[i] = &regionWork{y: vec(n), a0: make([]float64, k), delta: vec(k), resid: make([]float64, n)}
	}
	e.qtBatch(ws, func(w *regionWork) []float64 { return w.y }, func(w *regionWork) []float64 { return w.a0 })
	e.residBatch(ws, func(w *regionWork) []float64 { return w.y }, func(w *regionWork) []float64 { return w.delta })
	for i, w := range ws {
		for j := 0; j < k; j++ {
			want, scale := 0.0, 0.0
			for s := 0; s < n; s++ {
				want += b.q[s*k+j] * w.y[s]
				scale += math.Abs(b.q[s*k+j] * w.y[s])
			}
			check("Q'y", w.a0[j], want, scale)
		}
		for s := 0; s < n; s++ {
			want, scale := w.y[s], math.Abs(w.y[s])
			for j := 0; j < k; j++ {
				want -= b.q[s*k+j] * w.delta[j]
				scale += math.Abs(b.q[s*k+j] * w.delta[j])
			}
			if math.Abs(w.resid[s]-want) > 1e-12*scale {
				t.Fatalf("region %d, volume %d: y - Qδ = %.17g, want %.17g", i, s, w.resid[s], want)
			}
		}
	}
}

// TestLagProductTraces checks tr(Q'D_jD_kQ) from lagProductTraces against
// the definition: D_jQ formed column by column ((D_jQ)_t = (q_{t-j} +
// q_{t+j})/2, rows outside the run omitted) and the trace taken as the sum
// of the elementwise products of D_jQ and D_kQ. The designs are random with
// an intercept and, in one, indicator columns for volumes at both ends, so
// that the end pieces carry weight; the shortest run has lags up to n - 1,
// where j + k passes the run's end. Tolerance 1e-12 absolute: the traces
// are sums of at most n k products of numbers below 1 in size, whose order
// differs between the two computations.
func TestLagProductTraces(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	for _, tc := range []struct{ n, k, L int }{{6, 2, 5}, {40, 5, 10}, {200, 12, 16}, {301, 9, 8}} {
		x := mat.NewDense(tc.n, tc.k, nil)
		for t := 0; t < tc.n; t++ {
			x.Set(t, 0, 1)
			for j := 1; j < tc.k; j++ {
				x.Set(t, j, rng.NormFloat64())
			}
		}
		if tc.n == 40 {
			// Indicators of the first and last volumes.
			for t := 0; t < tc.n; t++ {
				x.Set(t, 3, 0)
				x.Set(t, 4, 0)
			}
			x.Set(0, 3, 1)
			x.Set(tc.n-1, 4, 1)
		}
		b, err := newRunBasis(x)
		if err != nil {
			t.Fatal(err)
		}
		n, k := b.n, b.k
		dq := func(j int) []float64 {
			m := make([]float64, n*k)
			for s := 0; s < n; s++ {
				for c := 0; c < k; c++ {
					if j == 0 {
						m[s*k+c] = b.q[s*k+c]
						continue
					}
					if s-j >= 0 {
						m[s*k+c] += 0.5 * b.q[(s-j)*k+c]
					}
					if s+j < n {
						m[s*k+c] += 0.5 * b.q[(s+j)*k+c]
					}
				}
			}
			return m
		}
		tr := b.lagProductTraces(tc.L)
		for j := 0; j <= tc.L; j++ {
			dj := dq(j)
			for kk := 0; kk <= j; kk++ {
				dk := dq(kk)
				want := 0.0
				for i := range dj {
					want += dj[i] * dk[i]
				}
				if got := tr(j, kk); math.Abs(got-want) > 1e-12 {
					t.Errorf("n %d, j %d, k %d: tr(Q'D_jD_kQ) = %.15g, want %.15g", n, j, kk, got, want)
				}
			}
		}
	}
}

// TestCholInverse checks cholesky and cholInverse at sizes around their
// block width of four: L L' = A (to 1e-12 k, the size of A's entries),
// inv A = I, inv symmetric, U zero below its diagonal and W L = I for
// W = U' (U = (L^-1)'). The matrices are B B' + k I with B standard normal
// (fixed seed), condition numbers below about 10, so 1e-12 bounds the
// rounding of sums of k products of order 1.
func TestCholInverse(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	for _, k := range []int{1, 2, 3, 4, 5, 7, 8, 9, 13, 30} {
		bm := make([]float64, k*k)
		for i := range bm {
			bm[i] = rng.NormFloat64()
		}
		a := make([]float64, k*k)
		for i := 0; i < k; i++ {
			for j := 0; j < k; j++ {
				for p := 0; p < k; p++ {
					a[i*k+j] += bm[i*k+p] * bm[j*k+p]
				}
			}
			a[i*k+i] += float64(k)
		}
		l := append([]float64(nil), a...)
		if !cholesky(l, k) {
			t.Fatalf("k %d: not positive definite", k)
		}
		for i := 0; i < k; i++ {
			for j := 0; j <= i; j++ {
				s := 0.0 // (L L')_ij
				for p := 0; p <= j; p++ {
					s += l[i*k+p] * l[j*k+p]
				}
				if !(math.Abs(s-a[i*k+j]) <= 1e-12*float64(k)) {
					t.Errorf("k %d: (L L')[%d][%d] = %g, want %g", k, i, j, s, a[i*k+j])
				}
			}
		}
		inv, u := make([]float64, k*k), make([]float64, k*k)
		for i := range inv {
			inv[i], u[i] = math.NaN(), math.NaN() // every entry must be written
		}
		cholInverse(l, k, inv, u)
		for i := 0; i < k; i++ {
			for j := 0; j < k; j++ {
				want := 0.0
				if i == j {
					want = 1
				}
				s := 0.0 // (inv A)_ij
				for p := 0; p < k; p++ {
					s += inv[i*k+p] * a[p*k+j]
				}
				if !(math.Abs(s-want) <= 1e-12) {
					t.Errorf("k %d: (inv A)[%d][%d] = %g", k, i, j, s)
				}
				if inv[i*k+j] != inv[j*k+i] {
					t.Errorf("k %d: inv not symmetric at %d, %d", k, i, j)
				}
				if j < i && u[i*k+j] != 0 {
					t.Errorf("k %d: U[%d][%d] = %g below the diagonal", k, i, j, u[i*k+j])
				}
				w := 0.0 // (W L)_ij = sum_p W_ip L_pj, W_ip = U_pi, j ≤ p ≤ i
				for p := j; p <= i; p++ {
					w += u[p*k+i] * l[p*k+j]
				}
				if !(math.Abs(w-want) <= 1e-12) {
					t.Errorf("k %d: (W L)[%d][%d] = %g", k, i, j, w)
				}
			}
		}
	}
}

// TestBrentMin: Brent's method finds the minima of functions whose minima
// are known in closed form: a parabola, cos on [2, 4] (minimum at π), a
// quartic with a flat bottom, |x - c| (no derivative at the minimum: golden
// steps), and a function that is +Inf on part of the bracket (as the
// Whittle profile is where no model has a positive variance). Tolerance:
// the method's own, sqrt(ε)|x| + tol/3 per side of the final bracket, with
// tol = 1e-10; the flat quartic is located only to about ε^(1/4).
func TestBrentMin(t *testing.T) {
	inf := math.Inf(1)
	cases := []struct {
		name    string
		f       func(float64) float64
		a, b, x float64
		tol     float64
	}{
		{"parabola", func(x float64) float64 { return (x-0.3)*(x-0.3) + 1 }, -1, 1, 0.3, 1e-8},
		{"cosine", math.Cos, 2, 4, math.Pi, 1e-7},
		{"flat quartic", func(x float64) float64 { d := x + 0.2; return d * d * d * d }, -1, 1, -0.2, 2e-4},
		{"kink", func(x float64) float64 { return math.Abs(x - 0.123) }, -1, 1, 0.123, 1e-8},
		{"infinite left", func(x float64) float64 {
			if x < -0.5 {
				return inf
			}
			return (x - 0.25) * (x - 0.25)
		}, -1, 1, 0.25, 1e-8},
	}
	for _, c := range cases {
		if x := brentMin(c.f, c.a, c.b, 1e-10); math.Abs(x-c.x) > c.tol {
			t.Errorf("%s: minimum at %.12g, want %.12g", c.name, x, c.x)
		}
	}
}

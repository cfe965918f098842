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

package fit

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestCovarianceFactor checks the packed covariance factor that RegionFit
// holds against dense products of the full matrix: Cov() gives back the
// matrix set, and contrast variances c'Cov c, standard errors and the F
// statistic b'(C Cov C')^-1 b/q agree with gonum's dense algebra. The
// matrices are random symmetric positive definite ones (fixed seed); the
// tolerance 1e-10 relative is rounding in products of order 10 at
// condition numbers below 1e4.
func TestCovarianceFactor(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	const tol = 1e-10
	for _, k := range []int{1, 2, 5, 17} {
		a := mat.NewDense(k+3, k, nil)
		for i := 0; i < k+3; i++ {
			for j := 0; j < k; j++ {
				a.Set(i, j, rng.NormFloat64())
			}
		}
		var ata mat.SymDense
		ata.SymOuterK(1, a.T())
		var cov mat.SymDense
		var ch mat.Cholesky
		if !ch.Factorize(&ata) {
			t.Fatal("random Gram matrix not positive definite")
		}
		if err := ch.InverseTo(&cov); err != nil {
			t.Fatal(err)
		}
		beta := make([]float64, k)
		for j := range beta {
			beta[j] = rng.NormFloat64()
		}
		f := &RegionFit{Beta: beta, DF: 20, Baseline: 100}
		if err := f.SetCov(&cov); err != nil {
			t.Fatal(err)
		}
		back := f.Cov()
		for i := 0; i < k; i++ {
			for j := 0; j < k; j++ {
				if d := math.Abs(back.At(i, j) - cov.At(i, j)); d > tol*math.Abs(cov.At(i, i)) {
					t.Errorf("k=%d: Cov(%d,%d) %.17g, set %.17g", k, i, j, back.At(i, j), cov.At(i, j))
				}
			}
			if d := math.Abs(f.StdError[i] - math.Sqrt(cov.At(i, i))); d > tol*f.StdError[i] {
				t.Errorf("k=%d: se %d %.17g, dense %.17g", k, i, f.StdError[i], math.Sqrt(cov.At(i, i)))
			}
		}
		c := make([]float64, k)
		for j := range c {
			c[j] = rng.NormFloat64()
		}
		want := math.Sqrt(mat.Inner(mat.NewVecDense(k, c), &cov, mat.NewVecDense(k, c)))
		if got := f.Contrast(c).StdError; math.Abs(got-want) > tol*want {
			t.Errorf("k=%d: contrast se %.17g, dense %.17g", k, got, want)
		}
		if k >= 2 {
			rows := [][]float64{c, make([]float64, k)}
			rows[1][k-1] = 1
			cm := mat.NewDense(2, k, append(append([]float64(nil), rows[0]...), rows[1]...))
			var cc, ccc mat.Dense
			cc.Mul(cm, &cov)
			ccc.Mul(&cc, cm.T())
			var cb mat.VecDense
			cb.MulVec(cm, mat.NewVecDense(k, beta))
			var sol mat.VecDense
			if err := sol.SolveVec(&ccc, &cb); err != nil {
				t.Fatal(err)
			}
			wantF := mat.Dot(&cb, &sol) / 2
			got, err := f.FTest(rows)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(got.Statistic-wantF) > tol*wantF {
				t.Errorf("k=%d: F %.17g, dense %.17g", k, got.Statistic, wantF)
			}
		}
	}
	var notPD mat.SymDense
	notPD.SymOuterK(1, mat.NewDense(3, 1, []float64{1, 2, 3}))
	if err := (&RegionFit{Beta: make([]float64, 3)}).SetCov(&notPD); err == nil {
		t.Error("a singular covariance was accepted")
	}
}

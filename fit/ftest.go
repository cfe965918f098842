package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/mathext"
)

// FTestFit is an F test of q contrast rows in one region and run.
type FTestFit struct {
	Statistic, PValue float64
	DFNum, DFDen      int
}

// FTest returns the Wald F test of H0: Cβ = 0,
//
//	F = (Cβ)' (C Cov(β) C')^-1 (Cβ) / q,   q = rank(C),
//
// with Cov(β) = σ̂² (X̃'X̃)^-1 of the (whitened) fit, referred to the F
// distribution with q and the residual degrees of freedom. For OLS this is
// the extra-sum-of-squares F of nested models (as R's anova() of two lm()
// fits gives it); with a noise model it is the same test on the whitened
// data. Rows of C must be linearly independent.
func (f *RegionFit) FTest(c [][]float64) (FTestFit, error) {
	q := len(c)
	k := len(f.Beta)
	cm := mat.NewDense(q, k, nil)
	for i, r := range c {
		cm.SetRow(i, r)
	}
	var cb mat.VecDense
	cb.MulVec(cm, mat.NewVecDense(k, f.Beta))
	// C Cov C' = s (C G)(C G)' with Cov = s G G' (see RegionFit).
	cg := make([][]float64, q)
	for i, r := range c {
		cg[i] = f.factorProduct(nil, r)
	}
	sym := mat.NewSymDense(q, nil)
	for i := 0; i < q; i++ {
		for j := i; j < q; j++ {
			sym.SetSym(i, j, f.covScale*vdot(cg[i], cg[j]))
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(sym) {
		return FTestFit{}, fmt.Errorf("the F test's rows are linearly dependent; remove the redundant rows")
	}
	var sol mat.VecDense
	if err := ch.SolveVecTo(&sol, &cb); err != nil {
		return FTestFit{}, err
	}
	stat := mat.Dot(&cb, &sol) / float64(q)
	return FTestFit{Statistic: stat, PValue: FUpperTail(stat, float64(q), float64(f.DF)), DFNum: q, DFDen: f.DF}, nil
}

// FUpperTail returns P(F > f) for the F distribution with d1 and d2 degrees
// of freedom, from the regularised incomplete beta function directly,
//
//	P(F > f) = I_x(d2/2, d1/2),  x = d2 / (d2 + d1 f)
//
// (Abramowitz and Stegun 1964, 26.6.2), so that small p values keep their
// relative precision (1 - CDF would lose them).
func FUpperTail(f, d1, d2 float64) float64 {
	if math.IsNaN(f) || d1 <= 0 || d2 <= 0 {
		return math.NaN()
	}
	if f <= 0 {
		return 1
	}
	return mathext.RegIncBeta(d2/2, d1/2, d2/(d2+d1*f))
}

package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// LSQ is the least-squares solver for one design matrix X (n×k, full column
// rank), shared by every response vector fitted against it. It factorises X
// once by Householder QR, X = Q R, and solves R β = Q'y by back-substitution:
// an orthogonal factorisation, never the normal equations, so the error in β
// grows with cond(X) rather than cond(X)² (Golub and Van Loan 2013, §5.3).
type LSQ struct {
	x    *mat.Dense
	qr   mat.QR
	n, k int
	// covU is (X'X)^-1 = R^-1 R^-T, the unscaled covariance of β.
	covU *mat.SymDense
}

// rankTolerance is the relative size below which a diagonal element of R
// counts as zero: k·n·eps scaled by the largest, as LAPACK's rank tests do.
func rankTolerance(n, k int) float64 {
	return float64(max(n, k)) * 2.220446049250313e-16
}

// checkFullRank refuses a triangular QR factor R (k×k, of an n×k matrix)
// with a diagonal element at or below rankTolerance times the largest.
func checkFullRank(r mat.Matrix, n, k int) error {
	big := 0.0
	for i := 0; i < k; i++ {
		big = math.Max(big, math.Abs(r.At(i, i)))
	}
	tol := rankTolerance(n, k) * big
	for i := 0; i < k; i++ {
		if math.Abs(r.At(i, i)) <= tol {
			return fmt.Errorf("design is rank-deficient at column %d", i+1)
		}
	}
	return nil
}

// NewLSQ factorises X. It returns an error when X has no more rows than
// columns or is rank-deficient to working precision.
func NewLSQ(x *mat.Dense) (*LSQ, error) {
	n, k := x.Dims()
	if n <= k {
		return nil, fmt.Errorf("%d observations cannot estimate %d terms", n, k)
	}
	l := &LSQ{x: x, n: n, k: k}
	l.qr.Factorize(x)
	var rd mat.Dense
	l.qr.RTo(&rd)
	r := mat.NewTriDense(k, mat.Upper, nil)
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			r.SetTri(i, j, rd.At(i, j))
		}
	}
	if err := checkFullRank(r, n, k); err != nil {
		return nil, err
	}
	var rinv mat.TriDense
	if err := rinv.InverseTri(r); err != nil {
		return nil, fmt.Errorf("design is numerically rank-deficient: %v", err)
	}
	l.covU = mat.NewSymDense(k, nil)
	// (R^-1)(R^-1)' is symmetric by construction.
	var c mat.Dense
	c.Mul(&rinv, rinv.T())
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			l.covU.SetSym(i, j, c.At(i, j))
		}
	}
	return l, nil
}

// Solve returns β and the residuals y - Xβ.
func (l *LSQ) Solve(y []float64) (beta, resid []float64) {
	if len(y) != l.n {
		panic("fit: response length does not match design rows")
	}
	var b mat.Dense
	if err := l.qr.SolveTo(&b, false, mat.NewDense(l.n, 1, y)); err != nil {
		// Rank was checked in NewLSQ; a failure here is a programming error.
		panic(err)
	}
	beta = make([]float64, l.k)
	for i := range beta {
		beta[i] = b.At(i, 0)
	}
	return beta, residuals(l.x, y, beta)
}

// CovUnscaled returns (X'X)^-1; the covariance of β is σ² times it.
func (l *LSQ) CovUnscaled() *mat.SymDense { return l.covU }

// OLS is an ordinary least-squares fit with its classical inference.
type OLS struct {
	Beta, StdError []float64
	Cov            *mat.SymDense // σ̂² (X'X)^-1
	Residuals      []float64
	RSS            float64
	DF             int     // n - k
	Sigma          float64 // sqrt(RSS / DF)
}

// LeastSquares fits y = Xβ + e by QR and returns estimates, standard errors
// sqrt(σ̂² [(X'X)^-1]_jj) with σ̂² = RSS/(n-k), and residuals.
func LeastSquares(x *mat.Dense, y []float64) (*OLS, error) {
	l, err := NewLSQ(x)
	if err != nil {
		return nil, err
	}
	return l.fit(y), nil
}

func (l *LSQ) fit(y []float64) *OLS {
	beta, resid := l.Solve(y)
	rss := 0.0
	for _, r := range resid {
		rss += r * r
	}
	df := l.n - l.k
	s2 := rss / float64(df)
	cov := mat.NewSymDense(l.k, nil)
	cov.ScaleSym(s2, l.covU)
	se := make([]float64, l.k)
	for j := range se {
		se[j] = math.Sqrt(cov.At(j, j))
	}
	return &OLS{Beta: beta, StdError: se, Cov: cov, Residuals: resid, RSS: rss, DF: df, Sigma: math.Sqrt(s2)}
}

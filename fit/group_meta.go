package fit

import (
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"
)

// MixedFit is a mixed-effects (random-effects meta-regression) fit of
// subject estimates y_i with known sampling variances v_i:
//
//	y = Xβ + u + e,  u_i ~ N(0, τ²),  e_i ~ N(0, v_i).
type MixedFit struct {
	Tau2  float64 // between-subject variance, REML
	Terms []TTest // one per column of X, Knapp-Hartung inference
}

// remlTol is the absolute tolerance on τ², in units of the mean sampling
// variance (the natural scale of τ²): far tighter than the 1e-5 the issue
// asks of τ², so that the Knapp-Hartung t values, which depend on τ², keep
// their 1e-8.
const remlTol = 1e-14

// MixedEffects fits the model of MixedFit. τ² is the restricted maximum
// likelihood estimate (Viechtbauer 2005, Journal of Educational and
// Behavioral Statistics 30:261-293): the root of the REML score equation
//
//	y'PPy = tr P,  W = diag(1/(v_i + τ²)),  P = W - W X (X'WX)^-1 X'W,
//
// or 0 when the score y'PPy - tr P is not positive at τ² = 0 (the
// restricted likelihood falls from the boundary). The root is bracketed by
// doubling from the mean sampling variance (the score is negative for
// large τ²) and found by Brent's method. Fisher scoring, τ² ← τ² + (y'PPy
// - tr P)/tr(PP), reaches the same root where it converges, but it can
// oscillate (it does on a reference sample), so it is not used. The
// coefficients are the weighted least-squares estimates with weights
// w_i = 1/(v_i + τ²), with the inference of Knapp and Hartung (2003,
// Statistics in Medicine 22:2693-2710):
//
//	Var(β̂) = s² (X'WX)^-1,  s² = Σ w_i (y_i - x_i'β̂)² / (k - p),
//
// t = β̂_j / se_j with k - p degrees of freedom (s² not truncated at 1): as
// metafor's rma(yi, sei = sqrt(v), mods = X, method = "REML", test = "knha").
// It needs more subjects than columns and every v_i finite and above 0.
func MixedEffects(x *mat.Dense, y, v []float64) (*MixedFit, error) {
	k, p := x.Dims()
	if len(y) != k || len(v) != k {
		panic("fit: mixed-effects inputs of different lengths")
	}
	if k <= p {
		return nil, errors.New("the mixed-effects model needs more subjects than terms")
	}
	meanV := 0.0
	for _, vi := range v {
		if !(vi > 0) || math.IsInf(vi, 0) {
			return nil, errors.New("the mixed-effects model needs every standard error finite and above 0")
		}
		meanV += vi / float64(k)
	}
	var serr error
	score := func(tau2 float64) float64 {
		s, err := remlScore(x, y, v, tau2)
		if err != nil {
			serr = err
			return math.NaN()
		}
		return s
	}
	tau2 := 0.0
	if s0 := score(0); s0 > 0 {
		lo, hi := 0.0, meanV
		for i := 0; score(hi) > 0; i++ {
			if i == 200 {
				return nil, errors.New("no REML estimate of the between-subject variance was found")
			}
			lo, hi = hi, 2*hi
		}
		tau2 = brentRoot(score, lo, hi, remlTol*meanV)
	}
	if serr != nil {
		return nil, serr
	}
	terms, err := weightedT(x, y, v, tau2)
	if err != nil {
		return nil, err
	}
	return &MixedFit{Tau2: tau2, Terms: terms}, nil
}

// whitened returns √W X and √W y for weights 1/(v_i + τ²).
func whitened(x *mat.Dense, y, v []float64, tau2 float64) (*mat.Dense, []float64, []float64) {
	k, p := x.Dims()
	xw := mat.NewDense(k, p, nil)
	yw := make([]float64, k)
	w := make([]float64, k)
	for i := 0; i < k; i++ {
		w[i] = 1 / (v[i] + tau2)
		r := math.Sqrt(w[i])
		for j := 0; j < p; j++ {
			xw.Set(i, j, r*x.At(i, j))
		}
		yw[i] = r * y[i]
	}
	return xw, yw, w
}

// remlScore returns the REML score y'PPy - tr P at τ² (twice the
// derivative of the restricted log-likelihood). With √W X = QR, H = QQ'
// the hat matrix and e the weighted least-squares residuals,
// P = W^½ (I - H) W^½, so Py = W e and tr P = Σ w_i (1 - H_ii).
func remlScore(x *mat.Dense, y, v []float64, tau2 float64) (float64, error) {
	k, p := x.Dims()
	xw, yw, w := whitened(x, y, v, tau2)
	l, err := NewLSQ(xw)
	if err != nil {
		return 0, err
	}
	_, rw := l.Solve(yw) // rw_i = √w_i e_i
	var q mat.Dense
	l.qr.QTo(&q)
	ypy, trP := 0.0, 0.0
	for i := 0; i < k; i++ {
		pyi := math.Sqrt(w[i]) * rw[i]
		ypy += pyi * pyi
		hii := 0.0
		for j := 0; j < p; j++ {
			hii += q.At(i, j) * q.At(i, j)
		}
		trP += w[i] * (1 - hii)
	}
	return ypy - trP, nil
}

// weightedT is the weighted least-squares fit with weights 1/(v_i + τ²) and
// the Knapp-Hartung standard errors: the ordinary least-squares t tests of
// the rows scaled by √w_i, whose σ̂² is exactly s² of MixedEffects.
func weightedT(x *mat.Dense, y, v []float64, tau2 float64) ([]TTest, error) {
	xw, yw, _ := whitened(x, y, v, tau2)
	return LinearModelT(xw, yw)
}

package fit

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// RegionFit is the fit of one region in one run.
type RegionFit struct {
	Region string
	// Skip says why the region was not fitted ("constant signal"); the
	// numeric fields are then unset.
	Skip     string
	Beta     []float64
	StdError []float64
	Cov      *mat.SymDense // covariance of Beta
	DF       int
	// Sigma is the standard deviation of the modelled noise in signal
	// units: for AR(P) the marginal s·sqrt(g_0), s² the innovation
	// variance; for OLS the residual standard deviation.
	Sigma    float64
	RSquared float64 // 1 - sum(y - Xβ)² / sum(y - ȳ)², on the unwhitened data
	// AR holds a_1..a_P of an AR(P) model, or φ of ARMA(1,1); MA holds θ
	// of ARMA(1,1) and is empty for AR models.
	AR, MA   []float64
	ARShrunk bool    // coefficients were pulled into the stationary region
	Baseline float64 // mean raw signal over the retained volumes
	// WhiteShare reads an ARMA(1,1) as AR(1) plus white noise: the share
	// of the noise variance that is white; NaN when it is not of that form.
	WhiteShare float64
	// NoiseName is the model the region was fitted with (none, ar1, ar:P,
	// arma; auto:MODEL for the choice of --noise auto), NoiseScope
	// "region" or "run" (--noise-pool), NoisePasses the estimation passes
	// (iterations of the REML optimiser for arma).
	NoiseName   string
	NoiseScope  string
	NoisePasses int
	// Residual checks on the whitened residuals.
	DurbinWatson float64
	LjungBoxP    float64
	NormalityP   float64
	// RawACF and WhitenedACF are the residual autocorrelations at lags
	// 1..LjungBoxLag(volumes) before and after whitening.
	RawACF, WhitenedACF []float64
}

// RunFit is the fit of every region of one run.
type RunFit struct {
	Design    *Design
	Noise     NoiseModel
	Volumes   int
	Condition float64 // condition number of the equilibrated design
	Regions   []RegionFit
}

// FitRun fits every region of a run: y[r] is region r's signal over the
// design's volumes. With a noise model each region's model is estimated
// from the residual autocovariances, corrected for the bias the design
// puts in them (Worsley et al. 2002), by iterating estimation and exact
// GLS whitening to convergence (see engine.go); auto chooses the model per
// region by AIC, arma fits ARMA(1,1) by REML. Estimates, standard errors
// and t values are exactly the GLS solution under the reported model,
// every volume kept. The design must have passed CheckDesign; an auto
// model takes Pmax from NoiseModel.MaxOrder (see ForTR), 8 when unset.
func FitRun(d *Design, names []string, y [][]float64, noise NoiseModel) (*RunFit, error) {
	return fitRunNoise(d, names, y, noise)
}

// baseline is the mean signal over the volumes that are not censored.
func baseline(y []float64, censored []bool) float64 {
	s, n := 0.0, 0
	for t, v := range y {
		if censored == nil || !censored[t] {
			s += v
			n++
		}
	}
	return s / float64(n)
}

func meanSS(y []float64) (mean, ss float64) {
	for _, v := range y {
		mean += v
	}
	mean /= float64(len(y))
	for _, v := range y {
		d := v - mean
		ss += d * d
	}
	return mean, ss
}

func residuals(x *mat.Dense, y, beta []float64) []float64 {
	r := make([]float64, len(y))
	for t := range y {
		s := y[t]
		for j, v := range x.RawRowView(t) {
			s -= v * beta[j]
		}
		r[t] = s
	}
	return r
}

// ContrastFit is the estimate of c'β in one region and run.
type ContrastFit struct {
	Estimate, StdError, Statistic, PValue float64
	DF                                    int
	PSC                                   float64 // 100 · estimate / baseline
}

// Contrast returns c'β, its standard error sqrt(c' Cov c), t = c'β / se,
// the two-sided p value from Student's t with the region's df, and the
// percent signal change 100 · c'β / baseline.
func (f *RegionFit) Contrast(c []float64) ContrastFit {
	est := 0.0
	for j, w := range c {
		est += w * f.Beta[j]
	}
	v := mat.Inner(mat.NewVecDense(len(c), c), f.Cov, mat.NewVecDense(len(c), c))
	se := math.Sqrt(v)
	t := est / se
	return ContrastFit{
		Estimate: est, StdError: se, Statistic: t, DF: f.DF,
		PValue: TwoSidedP(t, float64(f.DF)),
		PSC:    100 * est / f.Baseline,
	}
}

// Whitening is an exact whitening transform of a noise model.
type Whitening interface {
	// Apply writes the whitened series of src into dst (same length,
	// no aliasing).
	Apply(dst, src []float64)
}

// NoiseWhitener returns the exact whitening of n volumes under the region's
// fitted noise model (AR(P), ARMA(1,1), or the identity for OLS).
func (f *RegionFit) NoiseWhitener(n int) (Whitening, error) {
	p := noiseParams{ar: f.AR, ma: f.MA}
	if p.count() == 0 {
		return &Whitener{G0: 1}, nil
	}
	w, _, err := p.whitener(n)
	return w, err
}

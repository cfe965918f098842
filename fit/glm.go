package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// RegionFit is the fit of one region in one run.
type RegionFit struct {
	Region string
	// Skip says why the region was not fitted: "constant signal" over the
	// kept volumes, or a signal the design fits exactly (a residual of
	// rounding errors only, see exactFitTol); the numeric fields are then
	// unset.
	Skip     string
	Beta     []float64
	StdError []float64
	// The covariance of Beta is held as covScale · G G', G upper
	// triangular and packed (covFactor): half the memory of the matrix,
	// and every variance the inference needs is a sum of squares of G'c
	// (see Cov, Contrast, FTest). Regions fitted with one shared matrix
	// (OLS, a pooled noise model) share G.
	covFactor []float64
	covScale  float64
	DF        int
	// Sigma is the standard deviation of the modelled noise in signal
	// units: for AR(P) the marginal s·sqrt(g_0), s² the innovation
	// variance; for OLS the residual standard deviation.
	Sigma    float64
	RSquared float64 // 1 - sum(y - Xβ)² / sum(y - ȳ)² over the kept volumes, on the unwhitened data
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
	// LjungBoxP is NaN when the lag leaves no degrees of freedom after
	// the noise parameters (ar:8 on runs under about 90 volumes).
	LjungBoxP  float64
	NormalityP float64
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

// keptMeanSS returns the mean of y over the volumes that are not censored,
// the sum of squared deviations from it over the same volumes, and their
// number.
func keptMeanSS(y []float64, censored []bool) (mean, ss float64, n int) {
	for t, v := range y {
		if censored == nil || !censored[t] {
			mean += v
			n++
		}
	}
	mean /= float64(n)
	for t, v := range y {
		if censored == nil || !censored[t] {
			d := v - mean
			ss += d * d
		}
	}
	return mean, ss, n
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

// Contrast returns c'β, its standard error sqrt(c' Cov c) = sqrt(s ||G'c||²)
// (Cov = s G G', see RegionFit), t = c'β / se,
// the two-sided p value from Student's t with the region's df, and the
// percent signal change 100 · c'β / baseline.
func (f *RegionFit) Contrast(c []float64) ContrastFit {
	est := 0.0
	for j, w := range c {
		est += w * f.Beta[j]
	}
	u := f.factorProduct(nil, c)
	se := math.Sqrt(f.covScale * vdot(u, u))
	t := est / se
	return ContrastFit{
		Estimate: est, StdError: se, Statistic: t, DF: f.DF,
		PValue: TwoSidedP(t, float64(f.DF)),
		PSC:    f.PSC(est),
	}
}

// PSC returns the percent signal change of an estimate, 100 · est /
// baseline, or NaN where percent signal change is undefined: a baseline (the
// mean signal over the kept volumes) that is not positive or is below the
// modelled noise standard deviation (tSNR under 1). Raw fMRI signals have a
// large positive mean, with tSNR in the tens to hundreds (common practice);
// signals that were demeaned or z-scored before extraction do not, and
// dividing by their mean would give a large number of arbitrary sign. A NaN
// is written as an empty cell, which the group level reports as missing.
func (f *RegionFit) PSC(est float64) float64 {
	if !f.HasPSC() {
		return math.NaN()
	}
	return 100 * est / f.Baseline
}

// HasPSC reports whether percent signal change is defined (see PSC).
func (f *RegionFit) HasPSC() bool { return f.Baseline > 0 && f.Baseline >= f.Sigma }

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

// packedRow is the offset of row i of a packed upper triangle of order k
// (row i holds columns i..k-1).
func packedRow(i, k int) int { return i * (2*k - i + 1) / 2 }

// factorProduct writes G'c into dst (allocated when nil) for the region's
// covariance factor G: (G'c)_j = sum_{i ≤ j} G_ij c_i.
func (f *RegionFit) factorProduct(dst, c []float64) []float64 {
	k := len(c)
	if dst == nil {
		dst = make([]float64, k)
	}
	if f.covFactor == nil {
		// Released (dropCovariance) or never set: no variance to give.
		for j := range dst {
			dst[j] = math.NaN()
		}
		return dst
	}
	clear(dst)
	for i, ci := range c {
		if ci != 0 {
			off := packedRow(i, k)
			axpy(dst[i:], ci, f.covFactor[off:off+k-i])
		}
	}
	return dst
}

// Cov returns the covariance matrix of Beta, s G G', or nil once the run's
// covariances were released (large studies, after their contrasts).
func (f *RegionFit) Cov() *mat.SymDense {
	if f.covFactor == nil {
		return nil
	}
	k := len(f.Beta)
	out := mat.NewSymDense(k, nil)
	g := f.covFactor
	for i := 0; i < k; i++ {
		gi := g[packedRow(i, k):packedRow(i+1, k)]
		for j := i; j < k; j++ {
			// Rows i and j of G overlap in columns j..k-1.
			gj := g[packedRow(j, k):packedRow(j+1, k)]
			out.SetSym(i, j, f.covScale*vdot(gi[j-i:], gj))
		}
	}
	return out
}

// SetCov sets the covariance of Beta and the standard errors from a full
// matrix (symmetric positive definite), for fits made outside the engine.
func (f *RegionFit) SetCov(c *mat.SymDense) error {
	g, ok := upperFactor(c)
	if !ok {
		return fmt.Errorf("covariance matrix is not positive definite")
	}
	f.covFactor, f.covScale = g, 1
	f.setStdErrors()
	return nil
}

// setStdErrors sets StdError_i = sqrt(s sum_{j ≥ i} G_ij²), the square
// roots of the diagonal of s G G'.
func (f *RegionFit) setStdErrors() {
	k := len(f.Beta)
	f.StdError = make([]float64, k)
	for i := range f.StdError {
		gi := f.covFactor[packedRow(i, k):packedRow(i+1, k)]
		f.StdError[i] = math.Sqrt(f.covScale * vdot(gi, gi))
	}
}

// dropCovariance releases the covariance factor once the run's contrasts
// and F tests are computed (large studies keep only what the tables need).
func (f *RegionFit) dropCovariance() { f.covFactor = nil }

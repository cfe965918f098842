package fit

import (
	"fmt"
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
	AR       []float64
	ARShrunk bool    // coefficients were pulled into the stationary region
	Baseline float64 // mean raw signal over the retained volumes
	// Residual checks on the whitened residuals.
	DurbinWatson float64
	LjungBoxP    float64
	NormalityP   float64
}

// RunFit is the fit of every region of one run.
type RunFit struct {
	Design    *Design
	Noise     NoiseModel
	Volumes   int
	Condition float64 // condition number of the equilibrated design
	Regions   []RegionFit
}

// arPasses is the number of times the noise model is estimated: from the
// OLS residuals, then once more from the residuals of the first GLS fit.
const arPasses = 2

// FitRun fits every region of a run: y[r] is region r's signal over the
// design's volumes. With an AR(P) noise model each region's coefficients are
// estimated from its residuals with the bias correction of Worsley et al.
// (2002, see ResidualBias), the exact GLS solution (see Whitener) is
// computed, the coefficients are re-estimated from the GLS residuals and the
// GLS solution recomputed. The design must have passed CheckDesign.
func FitRun(d *Design, names []string, y [][]float64, noise NoiseModel) (*RunFit, error) {
	n, k := d.X.Dims()
	if len(names) != len(y) {
		panic("fit: region names and signals differ in length")
	}
	ols, err := NewLSQ(d.X)
	if err != nil {
		return nil, err
	}
	var estimate func(r []float64) ([]float64, bool)
	switch {
	case noise.Order == 1:
		b := NewAR1Bias(d.X)
		estimate = func(r []float64) ([]float64, bool) {
			rho, shrunk := b.Estimate(r)
			return []float64{rho}, shrunk
		}
	case noise.Order > 1:
		estimate = NewResidualBias(d.X, noise.Order).Estimate
	}
	rf := &RunFit{Design: d, Noise: noise, Volumes: n, Regions: make([]RegionFit, len(y))}
	xw := mat.NewDense(n, k, nil)
	col := make([]float64, n)
	wcol := make([]float64, n)
	yw := make([]float64, n)
	for r, yr := range y {
		out := RegionFit{Region: names[r]}
		mean, tss := meanSS(yr)
		out.Baseline = baseline(yr, d.Censored)
		if tss <= 1e-24*math.Max(1, mean*mean)*float64(n) {
			out.Skip = "constant signal"
			rf.Regions[r] = out
			continue
		}
		beta, resid := ols.Solve(yr)
		solver := ols
		white := &Whitener{G0: 1}
		copy(yw, yr)
		for pass := 0; pass < arPasses && estimate != nil; pass++ {
			a, shrunk := estimate(resid)
			out.AR, out.ARShrunk = a, out.ARShrunk || shrunk
			white, err = NewWhitener(a)
			if err != nil {
				return nil, fmt.Errorf("region %q: %v", names[r], err)
			}
			for j := 0; j < k; j++ {
				mat.Col(col, j, d.X)
				white.Apply(wcol, col)
				xw.SetCol(j, wcol)
			}
			white.Apply(yw, yr)
			solver, err = NewLSQ(xw)
			if err != nil {
				return nil, fmt.Errorf("region %q: whitened design: %v", names[r], err)
			}
			beta, _ = solver.Solve(yw)
			resid = residuals(d.X, yr, beta)
		}
		res := solver.fit(yw)
		out.Beta = beta
		out.StdError = res.StdError
		out.Cov = res.Cov
		out.DF = res.DF
		out.Sigma = res.Sigma * math.Sqrt(white.G0)
		rss := 0.0
		for _, v := range resid {
			rss += v * v
		}
		out.RSquared = 1 - rss/tss
		wr := res.Residuals
		out.DurbinWatson = DurbinWatson(wr)
		_, out.LjungBoxP = LjungBox(wr, LjungBoxLag(n), noise.Order)
		_, out.NormalityP = JarqueBera(wr)
		rf.Regions[r] = out
	}
	return rf, nil
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

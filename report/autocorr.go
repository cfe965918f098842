package report

import (
	"fmt"
	"sort"
	"strconv"
	"strings"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/roi"
)

// Autocorrelation is autocorrelation.csv: the residual autocorrelation of
// every fitted region at the Ljung-Box lags, before and after the noise
// model's whitening, so that what the model leaves can be read lag by lag.
var Autocorrelation = TableDef{"autocorrelation.csv", "subject, session, run, region, lag", []ColumnDef{
	colSubject, colSession, colRun, colRegion,
	{"lag", "lag, 1 to min(10, volumes/5) (the Ljung-Box lags)", "volumes"},
	{"raw", "autocorrelation of the residuals y - Xβ̂ of the final fit, before whitening, about their mean", ""},
	{"whitened", "autocorrelation of the whitened residuals (what the noise model leaves: within about ±2/sqrt(volumes) of 0 when they are white)", ""},
}}

// writeAutocorrelation writes autocorrelation.csv; regions and runs that
// were not fitted have no rows. Rows are formatted in parts of
// partRegions regions (see writeParts).
func writeAutocorrelation(out *Output, res *fit.StudyResult) error {
	return writeParts(out, Autocorrelation, regionParts(res, func(t *tableWriter, rr *fit.RunResult, regions []fit.RegionFit) {
		autocorrelationRows(t, rr.Plan.Run.Spec, regions)
	}))
}

// autocorrelationRows appends the autocorrelation rows of the given
// regions of the run s.
func autocorrelationRows(tw *tableWriter, s roi.RunSpec, regions []fit.RegionFit) {
	var key cellRun
	for ri := range regions {
		reg := &regions[ri]
		if reg.Skip != "" {
			continue
		}
		key.set(s.Subject, s.Session, s.Run, reg.Region)
		for k := range reg.RawACF {
			tw.cells(&key)
			tw.integer(k + 1)
			tw.num(reg.RawACF[k])
			tw.num(reg.WhitenedACF[k])
			tw.end()
		}
	}
}

// noiseSummary describes the noise model for report.md, with the models
// --noise auto chose and how often.
func noiseSummary(res *fit.StudyResult) string {
	o := res.Options.Noise
	scope := "per region"
	if o.Pool {
		scope = "one per run from all regions (--noise-pool)"
	}
	var what string
	switch o.Kind {
	case fit.NoiseOLS:
		return " (ordinary least squares)"
	case fit.NoiseAR:
		what = fmt.Sprintf("AR(%d), %s, from bias-corrected residual autocorrelation", o.Order, scope)
	case fit.NoiseARMA:
		what = "ARMA(1,1) (AR(1) plus white noise) by REML, " + scope
	default:
		what = fmt.Sprintf("%s, the AIC choice among AR(1..Pmax) (Pmax from TR: about 7 s of lags, at most 8) and ARMA(1,1) (AR(1) plus white noise) on bias-corrected residual autocorrelation", scope)
		count := map[string]int{}
		total := 0
		for _, r := range res.Runs {
			if r.Fit == nil {
				continue
			}
			for _, reg := range r.Fit.Regions {
				if reg.Skip == "" {
					count[strings.TrimPrefix(reg.NoiseName, "auto:")]++
					total++
				}
			}
		}
		var names []string
		for m := range count {
			names = append(names, m)
		}
		sort.Slice(names, func(i, j int) bool {
			return count[names[i]] > count[names[j]] || count[names[i]] == count[names[j]] && names[i] < names[j]
		})
		var parts []string
		for _, m := range names {
			parts = append(parts, fmt.Sprintf("`%s` %d", m, count[m]))
		}
		if total > 0 {
			what += "; chosen: " + strings.Join(parts, ", ") + " of " + strconv.Itoa(total) + " region fits"
		}
	}
	return " (" + what + "; estimation and exact GLS whitening iterated to convergence, every volume kept)"
}

// ljungBoxAdvice is what to try where whitening left autocorrelation.
func ljungBoxAdvice(o fit.NoiseModel) string {
	var try string
	switch {
	case o.Pool:
		try = "fit the noise per region (drop --noise-pool): one model for the run does not fit these regions"
	case o.Kind == fit.NoiseOLS:
		try = "model the noise (--noise auto, the default)"
	case o.Kind == fit.NoiseAuto:
		try = "auto already took the best of AR(1..Pmax) and AR(1)+white, so the structure is rarely noise of low order: look for slow drift (lower --highpass), motion or physiological confounds missing from the model"
	default:
		try = "try --noise auto (the per-region choice among AR orders and AR(1)+white) or a higher AR order (--noise ar:P)"
	}
	return "The noise model leaves structure (lags in `autocorrelation.csv`): " + try + "; also check drift (--highpass) and motion terms. p values of these regions are likely too small."
}

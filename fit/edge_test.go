package fit_test

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/roi"
	"github.com/tessera-fmri/tessera/simulate"
)

func blockEvents(n int, tr float64) []roi.Event {
	var evs []roi.Event
	for on := 10.0; on < float64(n)*tr-30; on += 40 {
		evs = append(evs, roi.Event{Onset: on, Duration: 16, Amplitude: 1, Condition: "a"})
	}
	return evs
}

func edgeDesign(t *testing.T, n int) *fit.Design {
	t.Helper()
	d, err := fit.BuildDesign(fit.DesignSpec{Volumes: n, TR: 2, SliceRef: 0.5, Highpass: 128, Events: blockEvents(n, 2)})
	if err != nil {
		t.Fatal(err)
	}
	return d
}

func finite(t *testing.T, what string, vs ...float64) {
	t.Helper()
	for _, v := range vs {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Errorf("%s: non-finite value %g", what, v)
		}
	}
}

// TestHugeBaselineTinyVariance: a baseline of 1e6 with noise of sd 1e-3
// (tSNR 1e9) gives the same condition estimate as the same series about 0,
// to 1e-6 relative: least squares by QR loses about cond · 1e-16 · 1e6/1e-3
// of the noise scale, far below the estimate's own precision.
func TestHugeBaselineTinyVariance(t *testing.T) {
	const n = 200
	d := edgeDesign(t, n)
	rng := rand.New(rand.NewPCG(1, 2))
	small := make([]float64, n)
	huge := make([]float64, n)
	for i := range small {
		small[i] = 0.01*d.X.At(i, 0) + 1e-3*rng.NormFloat64()
		huge[i] = 1e6 + small[i]
	}
	for _, noise := range []string{"none", "ar1", "ar:3"} {
		nm, _ := fit.ParseNoise(noise)
		a, err := fit.FitRun(d, []string{"r"}, [][]float64{small}, nm)
		if err != nil {
			t.Fatal(err)
		}
		b, err := fit.FitRun(d, []string{"r"}, [][]float64{huge}, nm)
		if err != nil {
			t.Fatal(err)
		}
		ra, rb := a.Regions[0], b.Regions[0]
		if rb.Skip != "" {
			t.Fatalf("%s: region skipped: %s", noise, rb.Skip)
		}
		if e := math.Abs(ra.Beta[0]-rb.Beta[0]) / math.Abs(ra.Beta[0]); e > 1e-6 {
			t.Errorf("%s: estimate %.12g vs %.12g about 0 (rel %.2g)", noise, rb.Beta[0], ra.Beta[0], e)
		}
		finite(t, noise, rb.StdError[0], rb.Sigma, rb.RSquared, rb.DurbinWatson, rb.LjungBoxP, rb.NormalityP)
	}
}

// TestNearConstantRegion: an exactly constant region is skipped with a
// reason; one that varies in its last digits is fitted with finite results.
func TestNearConstantRegion(t *testing.T) {
	const n = 150
	d := edgeDesign(t, n)
	flat := make([]float64, n)
	wobble := make([]float64, n)
	for i := range flat {
		flat[i] = 812.5
		wobble[i] = 812.5 + 1e-9*float64(i%5)
	}
	rf, err := fit.FitRun(d, []string{"flat", "wobble"}, [][]float64{flat, wobble}, fit.NoiseModel{Name: "ar1", Order: 1})
	if err != nil {
		t.Fatal(err)
	}
	if rf.Regions[0].Skip != "constant signal" {
		t.Errorf("constant region: skip %q", rf.Regions[0].Skip)
	}
	w := rf.Regions[1]
	if w.Skip != "" {
		t.Fatalf("near-constant region skipped: %s", w.Skip)
	}
	finite(t, "wobble", append(append([]float64{w.Sigma, w.RSquared}, w.Beta...), w.StdError...)...)
}

// TestBarelyEnoughVolumes: a run with one more volume than terms fits with
// df = 1 and finite results under --noise none; with as many volumes as
// terms it is refused. An AR(1) cannot be estimated from one residual
// degree of freedom (the residual is a fixed vector times one number, so
// its lag sums at lags 0 and 1 carry a single number), and ar1 is refused
// in plain words, whatever the rounding of the singular bias correction.
func TestBarelyEnoughVolumes(t *testing.T) {
	evs := []roi.Event{{Onset: 2, Duration: 4, Amplitude: 1, Condition: "a"}}
	d, err := fit.BuildDesign(fit.DesignSpec{Volumes: 3, TR: 2, SliceRef: 0.5, Events: evs})
	if err != nil {
		t.Fatal(err)
	}
	if _, k := d.X.Dims(); k != 2 {
		t.Fatalf("%d terms, want a and intercept", k)
	}
	y := []float64{100, 103, 101}
	rf, err := fit.FitRun(d, []string{"r"}, [][]float64{y}, fit.NoiseModel{Name: "none"}.Resolve())
	if err != nil {
		t.Fatalf("none: %v", err)
	}
	r := rf.Regions[0]
	if r.DF != 1 {
		t.Errorf("none: df %d, want 1", r.DF)
	}
	finite(t, "none", append(r.Beta, r.StdError...)...)
	ar1, _ := fit.ParseNoise("ar1")
	if _, err := fit.FitRun(d, []string{"r"}, [][]float64{y}, ar1); err == nil || !strings.Contains(err.Error(), "1 residual degrees of freedom, too few to estimate the ar1 noise model") {
		t.Errorf("ar1 with df 1: error %v", err)
	}
	d2, _ := fit.BuildDesign(fit.DesignSpec{Volumes: 2, TR: 2, SliceRef: 0.5, Events: evs})
	if _, err := fit.CheckDesign("01_1", d2); err == nil || !strings.Contains(err.Error(), "2 volumes cannot estimate 2 terms") {
		t.Errorf("2 volumes for 2 terms: %v", err)
	}
}

// TestIllConditionedDesignRefused: two conditions whose regressors differ by
// 1e-10 of their size make a design whose condition number float64 cannot
// support; it is refused with the condition number and both terms named.
func TestIllConditionedDesignRefused(t *testing.T) {
	evs := blockEvents(150, 2)
	for _, e := range blockEvents(150, 2) {
		e.Condition = "b"
		e.Amplitude = 1 + 1e-10
		evs = append(evs, e)
	}
	evs = append(evs, roi.Event{Onset: 1, Duration: 1e-9, Amplitude: 1, Condition: "b"})
	d, err := fit.BuildDesign(fit.DesignSpec{Volumes: 150, TR: 2, SliceRef: 0.5, Highpass: 128, Events: evs})
	if err != nil {
		t.Fatal(err)
	}
	_, err = fit.CheckDesign("03_2", d)
	if err == nil {
		t.Fatal("design accepted")
	}
	msg := err.Error()
	for _, want := range []string{"run 03_2", "condition number", "limit 1e+08"} {
		if !strings.Contains(msg, want) {
			t.Errorf("message %q lacks %q", msg, want)
		}
	}
	if !strings.Contains(msg, "are a, b:") && !strings.Contains(msg, "are b, a:") {
		t.Errorf("message %q does not name a and b as the terms involved", msg)
	}
}

// TestAREdgeOfStationarity: a random walk (a unit root) fitted with AR(1)
// and no drift terms (which would otherwise absorb the walk's slow part)
// has its coefficient held inside the stationary region (at most 0.99),
// flagged, and the study fit warns about it.
func TestAREdgeOfStationarity(t *testing.T) {
	const n = 300
	d, err := fit.BuildDesign(fit.DesignSpec{Volumes: n, TR: 2, SliceRef: 0.5, Events: blockEvents(n, 2)})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(7, 7))
	y := make([]float64, n)
	v := 1000.0
	for i := range y {
		v += 5 * rng.NormFloat64()
		y[i] = v
	}
	rf, err := fit.FitRun(d, []string{"walk"}, [][]float64{y}, fit.NoiseModel{Name: "ar1", Order: 1})
	if err != nil {
		t.Fatal(err)
	}
	r := rf.Regions[0]
	if len(r.AR) != 1 || r.AR[0] > 0.99 || !r.ARShrunk {
		t.Errorf("AR %v, shrunk %v: want a coefficient held at or below 0.99 and flagged", r.AR, r.ARShrunk)
	}
	finite(t, "walk", append(r.Beta, r.StdError...)...)
	sig := &roi.Numeric{Names: []string{"walk"}, Cols: [][]float64{y}}
	run := &roi.Run{Spec: roi.RunSpec{Subject: "01", Run: "1", TR: 2}, Signals: sig, Events: &roi.Events{Events: blockEvents(n, 2)}}
	o := fit.Options{SliceRef: 0.5, Noise: fit.NoiseModel{Name: "ar1", Order: 1}, Jobs: 1}
	plans, err := fit.Plan([]*roi.Run{run}, o)
	if err != nil {
		t.Fatal(err)
	}
	res, err := fit.FitStudy(plans, o)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(strings.Join(res.Warnings, "\n"), "edge of stationarity") {
		t.Errorf("no stationarity warning: %v", res.Warnings)
	}
}

// TestRegionBlocksIndependent: a run with more regions than one block is
// fitted in blocks; every region's results equal those of fitting it alone.
func TestRegionBlocksIndependent(t *testing.T) {
	const n, regions = 120, 2*2048 + 3
	d := edgeDesign(t, n)
	rng := rand.New(rand.NewPCG(5, 6))
	y := make([][]float64, regions)
	names := make([]string, regions)
	for r := range y {
		names[r] = "r"
		y[r] = make([]float64, n)
		e := 0.0
		for i := range y[r] {
			e = 0.4*e + rng.NormFloat64()
			y[r][i] = 500 + e + 0.5*d.X.At(i, 0)
		}
	}
	nm, _ := fit.ParseNoise("ar1")
	all, err := fit.FitRun(d, names, y, nm)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range []int{0, 2047, 2048, 4098} {
		one, err := fit.FitRun(d, names[:1], y[r:r+1], nm)
		if err != nil {
			t.Fatal(err)
		}
		a, b := all.Regions[r], one.Regions[0]
		if a.Beta[0] != b.Beta[0] || a.StdError[0] != b.StdError[0] || a.AR[0] != b.AR[0] {
			t.Errorf("region %d: in a block %v %v %v, alone %v %v %v", r, a.Beta[0], a.StdError[0], a.AR, b.Beta[0], b.StdError[0], b.AR)
		}
	}
}

// TestShortRunsEveryNoiseModel fits short event runs (40 and 60 volumes,
// so the estimation lags are cut to a quarter of the run), with censoring
// of high-motion volumes, with every noise model through the study path
// the command uses: no model may fail, panic or leave a non-finite
// estimate. Such a run once made the first pass's corrected
// autocovariances of a region non-positive at lag 0, and the ARMA(1,1)
// candidate of auto then indexed an empty slice.
func TestShortRunsEveryNoiseModel(t *testing.T) {
	for _, noise := range []string{"none", "ar1", "ar:3", "arma", "auto"} {
		nm, err := fit.ParseNoise(noise)
		if err != nil {
			t.Fatal(err)
		}
		for _, vol := range []int{40, 60} {
			st, err := simulate.Generate(simulate.Options{Subjects: 2, Runs: 2, Regions: 5, Volumes: vol, TR: 2,
				Design: "event", WhiteShare: 0.5, Seed: 1})
			if err != nil {
				t.Fatal(err)
			}
			runs := st.Inputs()
			o := fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: nm, CensorFD: 0.2, Jobs: 1}
			plans, err := fit.Plan(runs, o)
			if err != nil {
				t.Fatal(err)
			}
			res, err := fit.FitStudy(plans, o)
			if err != nil {
				t.Fatalf("%s, %d volumes: %v", noise, vol, err)
			}
			for _, rr := range res.Runs {
				if rr.Fit == nil {
					continue
				}
				for _, reg := range rr.Fit.Regions {
					finite(t, noise+" "+reg.Region, append(append([]float64{}, reg.Beta...), reg.StdError...)...)
				}
			}
		}
	}
}

// TestConstantOverKeptVolumes: a region that is constant over every kept
// volume and differs only at a censored one carries no information (the
// censored volume's indicator fits it exactly) and is skipped as constant,
// not fitted to rounding errors with a t value of order 1.
func TestConstantOverKeptVolumes(t *testing.T) {
	const n = 60
	censor := make([]bool, n)
	censor[20] = true
	d, err := fit.BuildDesign(fit.DesignSpec{Volumes: n, TR: 2, SliceRef: 0.5, Highpass: 128, Events: blockEvents(n, 2), Censor: censor})
	if err != nil {
		t.Fatal(err)
	}
	for _, level := range []float64{0, 1000} {
		y := make([]float64, n)
		for i := range y {
			y[i] = level
		}
		y[20] = level + 1
		for _, noise := range []string{"none", "ar1", "arma", "auto"} {
			nm, _ := fit.ParseNoise(noise)
			rf, err := fit.FitRun(d, []string{"r"}, [][]float64{y}, nm)
			if err != nil {
				t.Fatal(err)
			}
			if r := rf.Regions[0]; r.Skip != "constant signal" {
				t.Errorf("level %g, %s: skip %q, want constant signal (beta %v, se %v)", level, noise, r.Skip, r.Beta, r.StdError)
			}
		}
	}
}

// TestExactFitSkipped: a region that is exactly a combination of design
// columns has a residual of rounding errors only; it is skipped with a
// reason instead of reporting t values of 1e13 and more, and under
// --noise-pool it does not enter the run's noise model: the other region's
// results are those of a fit without it (to 1e-12 relative, the rounding
// of two fits that differ only in the order of sums).
func TestExactFitSkipped(t *testing.T) {
	const n = 100
	d := edgeDesign(t, n)
	rng := rand.New(rand.NewPCG(3, 4))
	exact := make([]float64, n)
	real := make([]float64, n)
	e := 0.0
	for i := range exact {
		exact[i] = 1000 + 2*d.X.At(i, 0)
		e = 0.4*e + rng.NormFloat64()
		real[i] = 800 + 3*d.X.At(i, 0) + e
	}
	for _, noise := range []string{"none", "ar1", "ar:2", "arma", "auto"} {
		for _, pool := range []bool{false, true} {
			nm, _ := fit.ParseNoise(noise)
			nm.Pool = pool
			both, err := fit.FitRun(d, []string{"exact", "real"}, [][]float64{exact, real}, nm)
			if err != nil {
				t.Fatal(err)
			}
			alone, err := fit.FitRun(d, []string{"real"}, [][]float64{real}, nm)
			if err != nil {
				t.Fatal(err)
			}
			if s := both.Regions[0].Skip; !strings.Contains(s, "fitted exactly") {
				t.Errorf("%s pool=%v: exact region skip %q, beta %v se %v", noise, pool, s, both.Regions[0].Beta, both.Regions[0].StdError)
			}
			b, a := both.Regions[1], alone.Regions[0]
			if b.Skip != "" {
				t.Fatalf("%s pool=%v: real region skipped: %s", noise, pool, b.Skip)
			}
			if math.Abs(b.StdError[0]-a.StdError[0]) > 1e-12*a.StdError[0] || math.Abs(b.Beta[0]-a.Beta[0]) > 1e-12*math.Abs(a.Beta[0]) {
				t.Errorf("%s pool=%v: real region beta %g se %g, alone %g %g", noise, pool, b.Beta[0], b.StdError[0], a.Beta[0], a.StdError[0])
			}
		}
	}
}

// TestTooFewForNoiseModel: a run whose censoring leaves two stretches of
// five kept volumes has residual degrees of freedom but no pairs of kept
// volumes at lags 5 to 7, so the autocovariances an AR(1) is estimated
// from are not determined. The run is skipped when it is planned, with a
// warning in plain words (as a run with fewer volumes than terms is), and
// FitRun refuses it, not with a matrix error; --noise none fits it. The
// other run of the study is fitted.
func TestTooFewForNoiseModel(t *testing.T) {
	const n = 30
	y := make([]float64, n)
	rng := rand.New(rand.NewPCG(8, 9))
	for i := range y {
		y[i] = 500 + rng.NormFloat64()
		if i >= 5 && i < 25 {
			y[i] = math.NaN()
		}
	}
	run := &roi.Run{Spec: roi.RunSpec{Subject: "01", Run: "1", TR: 2, Signals: "sig.csv"},
		Signals: &roi.Numeric{Names: []string{"r"}, Cols: [][]float64{y}},
		Events:  &roi.Events{Events: []roi.Event{{Onset: 0, Duration: 6, Amplitude: 1, Condition: "a"}, {Onset: 50, Duration: 6, Amplitude: 1, Condition: "a"}}}}
	good := &roi.Run{Spec: roi.RunSpec{Subject: "01", Run: "2", TR: 2, Signals: "sig2.csv"},
		Signals: &roi.Numeric{Names: []string{"r"}, Cols: [][]float64{make([]float64, 80)}},
		Events:  run.Events}
	for i := range good.Signals.Cols[0] {
		good.Signals.Cols[0][i] = 500 + rng.NormFloat64()
	}
	for _, noise := range []string{"ar1", "arma", "auto"} {
		nm, _ := fit.ParseNoise(noise)
		o := fit.Options{SliceRef: 0.5, Highpass: 128, Noise: nm, MissingCensor: true}
		plans, err := fit.Plan([]*roi.Run{run, good}, o)
		if err != nil {
			t.Fatalf("%s: plan error %v", noise, err)
		}
		if plans[0].Skip != fit.SkipNoise || plans[1].Skipped() {
			t.Errorf("%s: skip %q and %q", noise, plans[0].Skip, plans[1].Skip)
		}
		warned := false
		for _, w := range plans[0].Warnings {
			warned = warned || strings.Contains(w, "run 01_1 is skipped:") && strings.Contains(w, "residual degrees of freedom, too few to estimate the "+noise+" noise model")
		}
		if !warned {
			t.Errorf("%s: warnings %q", noise, plans[0].Warnings)
		}
		res, err := fit.FitStudy(plans, o)
		if err != nil {
			t.Fatalf("%s: %v", noise, err)
		}
		if res.Runs[0].Fit != nil || res.Runs[1].Fit == nil {
			t.Errorf("%s: fits %v, %v; want the first run skipped, the second fitted", noise, res.Runs[0].Fit != nil, res.Runs[1].Fit != nil)
		}
	}
	o := fit.Options{SliceRef: 0.5, Highpass: 128, Noise: fit.NoiseModel{Name: "none"}.Resolve(), MissingCensor: true}
	plans, err := fit.Plan([]*roi.Run{run}, o)
	if err != nil {
		t.Fatalf("--noise none: %v", err)
	}
	res, err := fit.FitStudy(plans, o)
	if err != nil {
		t.Fatalf("--noise none: %v", err)
	}
	if r := res.Runs[0].Fit.Regions[0]; r.Skip != "" || !(r.StdError[0] > 0) {
		t.Errorf("--noise none: region %+v", r)
	}
	nm, _ := fit.ParseNoise("ar1")
	if _, err := fit.FitRun(plans[0].Design, []string{"r"}, plans[0].Y, nm); err == nil || !strings.Contains(err.Error(), "too few to estimate the ar1 noise model") {
		t.Errorf("FitRun error %v", err)
	}
}

// TestPSCUndefinedForDemeanedSignals fits a study in which one region's
// signals were demeaned before extraction (mean about zero, below the noise)
// and another's negated (mean negative): their percent signal change must
// be NaN, written as an empty cell, with a warning naming them, while the
// estimates and t values stay, and the raw regions keep a finite psc. The
// rule (baseline positive and at least sigma) is common practice for raw
// BOLD signals, whose tSNR is in the tens to hundreds.
func TestPSCUndefinedForDemeanedSignals(t *testing.T) {
	st, err := simulate.Generate(simulate.Options{Subjects: 1, Runs: 2, Regions: 4, Volumes: 200, TR: 2,
		Design: "event", WhiteShare: 0.5, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	runs := st.Inputs()
	for _, r := range runs {
		sig := r.Signals.Cols
		mean := 0.0
		for _, v := range sig[0] {
			mean += v
		}
		mean /= float64(len(sig[0]))
		for i := range sig[0] {
			sig[0][i] -= mean
			sig[1][i] = -sig[1][i]
		}
	}
	nm, _ := fit.ParseNoise("ar1")
	o := fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: nm, Jobs: 1}
	plans, err := fit.Plan(runs, o)
	if err != nil {
		t.Fatal(err)
	}
	res, err := fit.FitStudy(plans, o)
	if err != nil {
		t.Fatal(err)
	}
	checked := 0
	for _, rr := range res.Runs {
		for ri, reg := range rr.Fit.Regions {
			for ci := range rr.Contrasts {
				if !rr.Valid[ci] {
					continue
				}
				c := rr.Contrasts[ci][ri]
				checked++
				if math.IsNaN(c.Statistic) || math.IsNaN(c.Estimate) {
					t.Errorf("%s: estimate or t missing", reg.Region)
				}
				if undefined := ri < 2; undefined != math.IsNaN(c.PSC) {
					t.Errorf("%s (baseline %.3g, sigma %.3g): psc %v", reg.Region, reg.Baseline, reg.Sigma, c.PSC)
				}
			}
		}
	}
	if checked == 0 || len(res.Subjects) == 0 {
		t.Fatalf("nothing checked: %d run contrasts, %d subject rows", checked, len(res.Subjects))
	}
	for _, s := range res.Subjects {
		if undefined := s.Region == st.Runs[0].Regions[0] || s.Region == st.Runs[0].Regions[1]; undefined != math.IsNaN(s.PSC) {
			t.Errorf("subject row %s: psc %v", s.Region, s.PSC)
		}
	}
	warned := false
	for _, w := range res.Warnings {
		if strings.Contains(w, "percent signal change is undefined for 2 region(s)") &&
			strings.Contains(w, st.Runs[0].Regions[0]) && strings.Contains(w, st.Runs[0].Regions[1]) {
			warned = true
		}
	}
	if !warned {
		t.Errorf("no warning naming the demeaned regions: %q", res.Warnings)
	}
}

// TestSubjectWithSkippedFirstRun: a subject whose first run is too short to
// fit (fewer volumes than terms) and whose second run is fitted gets one
// subject-level row per (region, contrast), from the one run, not one per
// run listed. (Found by an adversarial sweep: the rows were written twice,
// and group then refused the table.)
func TestSubjectWithSkippedFirstRun(t *testing.T) {
	st, err := simulate.Generate(simulate.Options{Subjects: 2, Runs: 2, Regions: 3, Volumes: 120, TR: 2,
		Design: "event", Seed: 5})
	if err != nil {
		t.Fatal(err)
	}
	runs := st.Inputs()
	// Subject 01's first run keeps 8 volumes.
	short := runs[0]
	if short.Spec.Subject != "01" || short.Spec.Run != "1" {
		t.Fatalf("first run is %s_%s", short.Spec.Subject, short.Spec.Run)
	}
	cut := func(cols [][]float64) [][]float64 {
		out := make([][]float64, len(cols))
		for i, c := range cols {
			out[i] = c[:8]
		}
		return out
	}
	short.Signals = &roi.Numeric{Names: short.Signals.Names, Cols: cut(short.Signals.Cols)}
	short.Confounds = &roi.Numeric{Names: short.Confounds.Names, Cols: cut(short.Confounds.Cols)}
	var evs []roi.Event
	for _, e := range short.Events.Events {
		if e.Onset < 16 {
			evs = append(evs, e)
		}
	}
	short.Events = &roi.Events{Events: evs}
	nm, _ := fit.ParseNoise("ar1")
	o := fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: nm, Jobs: 1}
	plans, err := fit.Plan(runs, o)
	if err != nil {
		t.Fatal(err)
	}
	if !plans[0].Skipped() {
		t.Fatal("the 8-volume run was not skipped")
	}
	res, err := fit.FitStudy(plans, o)
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	perSubject := map[string]int{}
	for _, r := range res.Subjects {
		key := r.Subject + "/" + r.Region + "/" + r.Contrast
		if seen[key] {
			t.Errorf("subject row %s twice", key)
		}
		seen[key] = true
		perSubject[r.Subject]++
		if r.Subject == "01" && r.Runs != 1 {
			t.Errorf("%s: %d runs, want 1", key, r.Runs)
		}
	}
	if perSubject["01"] == 0 || perSubject["01"] != perSubject["02"] {
		t.Errorf("rows per subject %v, want the same number for 01 and 02", perSubject)
	}
}

// TestOutOfRangeMagnitudes: an event amplitude of 1e300 makes a regressor
// whose squares overflow, and one of 1e-300 one whose squares vanish; a
// motion column of 1e158 overflows when squared for --motion-terms 24.
// Each is refused at planning, naming the term or the column (with the
// confounds file, not the events file), instead of failing later as a
// "rank-deficient column 2" or a "missing value" in a derived column.
// (Found by an adversarial sweep.)
func TestOutOfRangeMagnitudes(t *testing.T) {
	st, err := simulate.Generate(simulate.Options{Subjects: 1, Runs: 1, Regions: 2, Volumes: 120, TR: 2, Design: "event", Seed: 5})
	if err != nil {
		t.Fatal(err)
	}
	base := st.Inputs()[0]
	base.Spec.Signals, base.Spec.Events, base.Spec.Confounds = "sig.csv", "ev.tsv", "conf.csv"
	o := fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: fit.NoiseModel{Name: "none"}.Resolve(), Jobs: 1}
	for _, amp := range []float64{1e300, 1e-300} {
		r := *base
		var evs []roi.Event
		for _, e := range base.Events.Events {
			if e.Condition == "ordered" {
				e.Amplitude = amp
			}
			evs = append(evs, e)
		}
		r.Events = &roi.Events{Events: evs}
		_, err := fit.Plan([]*roi.Run{&r}, o)
		if err == nil || !strings.Contains(err.Error(), `term "ordered" is`) || !strings.Contains(err.Error(), "outside 1e-100 to 1e100") {
			t.Errorf("amplitude %g: error %v", amp, err)
		}
	}
	r := *base
	cols := make([][]float64, len(base.Confounds.Cols))
	copy(cols, base.Confounds.Cols)
	cols[0] = make([]float64, len(base.Confounds.Cols[0]))
	for i, v := range base.Confounds.Cols[0] {
		cols[0][i] = v * 1e160
	}
	r.Confounds = &roi.Numeric{Names: base.Confounds.Names, Cols: cols}
	o.MotionTerms = 24
	_, err = fit.Plan([]*roi.Run{&r}, o)
	if err == nil || !strings.Contains(err.Error(), "(conf.csv)") || !strings.Contains(err.Error(), `motion column "tx" has`) || !strings.Contains(err.Error(), "beyond ±1e100") {
		t.Errorf("motion 1e158: error %v", err)
	}
}

// TestSignalScale: a region's signal multiplied by 2^-50 (values about
// 1e-12) or 2^256 (about 1e80) gives the same t values, Ljung-Box and
// normality p as at its own scale (to 1e-9 relative: the fit is the same
// arithmetic on scaled numbers, up to the order of sums); before, the
// first was skipped as constant (an absolute floor in the constancy test)
// and the second lost its normality p (fourth powers overflowed). Beyond
// 1e100 (2^400, about 2.6e120) the region is skipped with the reason given
// rather than fitted with overflowing squares. (Found by an adversarial
// sweep.)
func TestSignalScale(t *testing.T) {
	st, err := simulate.Generate(simulate.Options{Subjects: 1, Runs: 1, Regions: 1, Volumes: 120, TR: 2, Design: "event", Seed: 5})
	if err != nil {
		t.Fatal(err)
	}
	nm, _ := fit.ParseNoise("ar1")
	o := fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: nm, Jobs: 1}
	plans, err := fit.Plan(st.Inputs(), o)
	if err != nil {
		t.Fatal(err)
	}
	d, y := plans[0].Design, plans[0].Y[0]
	fitAt := func(e int) fit.RegionFit {
		ys := make([]float64, len(y))
		for i, v := range y {
			ys[i] = math.Ldexp(v, e)
		}
		rf, err := fit.FitRun(d, []string{"r"}, [][]float64{ys}, nm)
		if err != nil {
			t.Fatalf("2^%d: %v", e, err)
		}
		return rf.Regions[0]
	}
	base := fitAt(0)
	close := func(a, b float64) bool { return math.Abs(a-b) <= 1e-9*math.Abs(b) }
	for _, e := range []int{-50, 256} {
		r := fitAt(e)
		if r.Skip != "" {
			t.Errorf("2^%d: skipped: %s", e, r.Skip)
			continue
		}
		for j := range base.Beta {
			if !close(r.Beta[j]/r.StdError[j], base.Beta[j]/base.StdError[j]) {
				t.Errorf("2^%d, term %d: t %g, at scale 1 %g", e, j, r.Beta[j]/r.StdError[j], base.Beta[j]/base.StdError[j])
			}
		}
		if !close(r.NormalityP, base.NormalityP) || !close(r.LjungBoxP, base.LjungBoxP) {
			t.Errorf("2^%d: normality p %g, Ljung-Box p %g; at scale 1 %g, %g", e, r.NormalityP, r.LjungBoxP, base.NormalityP, base.LjungBoxP)
		}
	}
	if r := fitAt(400); !strings.Contains(r.Skip, "outside 1e-100 to 1e100") {
		t.Errorf("2^400: skip %q", r.Skip)
	}
}

// TestContrastAndFTestNamesChecked: a contrast whose weights are all zero,
// two F tests with one name, an F test named like a condition's own F test
// (with --hrf fir), and an F-test row of zero weights are refused when the
// study is planned. Before, they gave rows with a standard error of 0 and
// empty t and p, or two rows of one key in ftests.csv. (Found by an
// adversarial sweep.)
func TestContrastAndFTestNamesChecked(t *testing.T) {
	st, err := simulate.Generate(simulate.Options{Subjects: 1, Runs: 1, Regions: 2, Volumes: 80, TR: 2, Design: "event", Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	contrast := func(s string) fit.Contrast {
		c, err := fit.ParseContrast(s)
		if err != nil {
			t.Fatal(err)
		}
		return c
	}
	ftest := func(s string) fit.FTest {
		f, err := fit.ParseFTest(s)
		if err != nil {
			t.Fatal(err)
		}
		return f
	}
	base := fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: fit.NoiseModel{Name: "none"}.Resolve(), Jobs: 1}
	cases := []struct {
		name string
		set  func(o *fit.Options)
		want string
	}{
		{"zero contrast", func(o *fit.Options) { o.Contrasts = []fit.Contrast{contrast("z = ordered - ordered")} }, `contrast "z" (ordered - ordered) has weights that are all zero`},
		{"two F tests of one name", func(o *fit.Options) {
			o.FTests = []fit.FTest{ftest("both = ordered; jumbled"), ftest("both = ordered")}
		}, `two F tests are named "both"`},
		{"F test named like a condition's own", func(o *fit.Options) {
			o.HRF, o.FIRWindow, o.FIRBins = fit.HRFFIR, 20, 5
			o.FTests = []fit.FTest{ftest("ordered = ordered:bin:1; ordered:bin:2")}
		}, `F test "ordered" has the name of condition "ordered"'s own F test`},
		{"zero F-test row", func(o *fit.Options) { o.FTests = []fit.FTest{ftest("f = ordered; 0*jumbled")} }, `F test "f" has a row "0*jumbled" whose weights are all zero`},
	}
	for _, c := range cases {
		o := base
		c.set(&o)
		if _, err := fit.Plan(st.Inputs(), o); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v", c.name, err)
		}
	}
}

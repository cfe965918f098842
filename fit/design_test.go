package fit

import (
	"math"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/tessera-fmri/tessera/roi"
)

// TestFramewiseDisplacementHandWorked follows the published definition
// (Power et al. 2012, NeuroImage 59:2142-2154): FD_t = |Δtx| + |Δty| + |Δtz|
// + 50 mm · (|Δrx| + |Δry| + |Δrz|), FD_0 = 0. Worked by hand:
//
//	t=1: 0.1 + 0.2 + 0    + 50·(0.001 + 0     + 0.0005) = 0.3  + 0.075 = 0.375
//	t=2: 0.2 + 0   + 0.05 + 50·(0     + 0.002 + 0     ) = 0.25 + 0.1   = 0.35
func TestFramewiseDisplacementHandWorked(t *testing.T) {
	m := [][]float64{
		{0, 0.1, 0.3},       // tx mm
		{0, -0.2, -0.2},     // ty
		{0, 0, 0.05},        // tz
		{0, 0.001, 0.001},   // rx rad
		{0, 0, -0.002},      // ry
		{0, 0.0005, 0.0005}, // rz
	}
	want := []float64{0, 0.375, 0.35}
	got := FramewiseDisplacement(m, false)
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-12 {
			t.Errorf("FD[%d] = %.15g, want %g", i, got[i], want[i])
		}
	}
	// The same rotations given in degrees: 0.001 rad = 0.0572958 deg.
	deg := make([][]float64, 6)
	for j := range m {
		deg[j] = append([]float64(nil), m[j]...)
		if j >= 3 {
			for i := range deg[j] {
				deg[j][i] *= 180 / math.Pi
			}
		}
	}
	got = FramewiseDisplacement(deg, true)
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-12 {
			t.Errorf("FD[%d] from degrees = %.15g, want %g", i, got[i], want[i])
		}
	}
}

// TestMotionExpansion checks the 12- and 24-parameter sets against their
// construction (Friston et al. 1996; backward differences as in
// Satterthwaite et al. 2013): columns, names and values.
func TestMotionExpansion(t *testing.T) {
	names := []string{"tx", "ty", "tz", "rx", "ry", "rz"}
	var m []Column
	for j, n := range names {
		v := make([]float64, 5)
		for i := range v {
			v[i] = float64((i+1)*(j+2)%7) * 0.1
		}
		m = append(m, Column{Name: n, Values: v})
	}
	e12, err := ExpandMotion(m, 12)
	if err != nil || len(e12) != 12 {
		t.Fatalf("12 terms: got %d, %v", len(e12), err)
	}
	e24, err := ExpandMotion(m, 24)
	if err != nil || len(e24) != 24 {
		t.Fatalf("24 terms: got %d, %v", len(e24), err)
	}
	for j, n := range names {
		d := e24[6+j]
		if d.Name != n+":diff" || d.Values[0] != 0 {
			t.Errorf("difference column %d: %s, first value %g", j, d.Name, d.Values[0])
		}
		for i := 1; i < 5; i++ {
			if d.Values[i] != m[j].Values[i]-m[j].Values[i-1] {
				t.Errorf("%s[%d] = %g", d.Name, i, d.Values[i])
			}
		}
		sq := e24[12+j]
		dsq := e24[18+j]
		if sq.Name != n+":sq" || dsq.Name != n+":diff:sq" {
			t.Errorf("square names %s, %s", sq.Name, dsq.Name)
		}
		mean := 0.0
		for _, v := range m[j].Values {
			mean += v / 5
		}
		for i := range sq.Values {
			if w := (m[j].Values[i] - mean) * (m[j].Values[i] - mean); math.Abs(sq.Values[i]-w) > 1e-15 {
				t.Errorf("%s[%d] = %g, want %g", sq.Name, i, sq.Values[i], w)
			}
		}
	}
	if _, err := ExpandMotion(m, 18); err == nil {
		t.Error("18 motion terms accepted")
	}
}

// TestVIFAgainstCar compares variance inflation factors with R's car::vif
// (r-cran-car; testdata/reference/design/design.R) on the committed design.
func TestVIFAgainstCar(t *testing.T) {
	x, _, terms := readRegression(t, "ols_input.csv")
	l, err := NewLSQ(x)
	if err != nil {
		t.Fatal(err)
	}
	_, rows := readCSV(t, refPath("design/vif.csv"))
	n, _ := x.Dims()
	for _, r := range rows {
		j := -1
		for i, name := range terms {
			if name == r[0] {
				j = i
			}
		}
		col := make([]float64, n)
		mat.Col(col, j, x)
		if e := relErr(VIF(l, col, j), atof(t, r[1])); e > tolLM {
			t.Errorf("%s: VIF %.17g, car::vif %s", r[0], VIF(l, col, j), r[1])
		}
	}
}

// TestFTestAgainstAnova compares the F test of x_a and x_b jointly with R's
// anova() of nested lm() fits, on the data (OLS) and after exact AR(1)
// whitening with coefficient 0.4 (testdata/reference/design/design.R).
func TestFTestAgainstAnova(t *testing.T) {
	x, y, _ := readRegression(t, "ols_input.csv")
	_, rows := readCSV(t, refPath("design/anova.csv"))
	for _, r := range rows {
		a := 0.0
		if r[0] == "gls_ar1_0.4" {
			a = 0.4
		}
		xx, yy := x, y
		if a != 0 {
			w, err := NewWhitener([]float64{a})
			if err != nil {
				t.Fatal(err)
			}
			xx, yy = whitenAll(w, x, y)
		}
		res, err := LeastSquares(xx, yy)
		if err != nil {
			t.Fatal(err)
		}
		rf := &RegionFit{Beta: res.Beta, DF: res.DF}
		if err := rf.SetCov(res.Cov); err != nil {
			t.Fatal(err)
		}
		got, err := rf.FTest([][]float64{{0, 0, 1, 0}, {0, 0, 0, 1}})
		if err != nil {
			t.Fatal(err)
		}
		if e := relErr(got.Statistic, atof(t, r[1])); e > tolLM {
			t.Errorf("%s: F %.17g, R %s", r[0], got.Statistic, r[1])
		}
		if got.DFNum != 2 || float64(got.DFDen) != atof(t, r[3]) {
			t.Errorf("%s: df %d, %d; R %s, %s", r[0], got.DFNum, got.DFDen, r[2], r[3])
		}
		// The F tail at p ~ 1e-12 loses a little more than the t tail.
		if e := relErr(got.PValue, atof(t, r[4])); e > 1e-8 {
			t.Errorf("%s: p %.17g, R %s (rel %.2g)", r[0], got.PValue, r[4], e)
		}
	}
}

func whitenAll(w *Whitener, x *mat.Dense, y []float64) (*mat.Dense, []float64) {
	n, k := x.Dims()
	xw := mat.NewDense(n, k, nil)
	col, wc := make([]float64, n), make([]float64, n)
	for j := 0; j < k; j++ {
		mat.Col(col, j, x)
		w.Apply(wc, col)
		xw.SetCol(j, wc)
	}
	yw := make([]float64, n)
	w.Apply(yw, y)
	return xw, yw
}

// TestLegendreAgainstScipy compares the polynomial drift terms with
// scipy.special.eval_legendre (testdata/reference/design/legendre.py).
func TestLegendreAgainstScipy(t *testing.T) {
	_, rows := readCSV(t, refPath("design/legendre.csv"))
	got := LegendreDrift(25, 4)
	for _, r := range rows {
		k, _ := strconv.Atoi(r[1])
		tt, _ := strconv.Atoi(r[2])
		if d := math.Abs(got[k-1][tt] - atof(t, r[3])); d > tolExact {
			t.Errorf("P_%d(t=%d) = %.17g, scipy %s", k, tt, got[k-1][tt], r[3])
		}
	}
}

// TestResponseDerivatives checks the analytic derivatives against central
// finite differences of the response (step 1e-5: truncation error about
// 1e-10 of the derivative's scale, rounding about 1e-11).
func TestResponseDerivatives(t *testing.T) {
	const h, tol = 1e-5, 1e-8
	for x := 0.25; x < 30; x += 0.25 {
		fd := (DoubleGamma(x+h) - DoubleGamma(x-h)) / (2 * h)
		if d := math.Abs(DoubleGammaTimeDerivative(x) - fd); d > tol {
			t.Errorf("time derivative at %g: %.12g vs finite difference %.12g", x, DoubleGammaTimeDerivative(x), fd)
		}
		fs := (DoubleGammaScaled(x, 1+h) - DoubleGammaScaled(x, 1-h)) / (2 * h)
		if d := math.Abs(DoubleGammaDispersionDerivative(x) - fs); d > tol {
			t.Errorf("dispersion derivative at %g: %.12g vs finite difference %.12g", x, DoubleGammaDispersionDerivative(x), fs)
		}
	}
}

// TestDerivativeAndModulatorOrthogonal: derivative and modulator terms are
// orthogonal to their condition's main term (|x'm| below 1e-10 of the norms).
func TestDerivativeAndModulatorOrthogonal(t *testing.T) {
	var evs []roi.Event
	for k := 0; k < 20; k++ {
		evs = append(evs, roi.Event{Onset: float64(6 + 13*k), Duration: 1, Amplitude: 1, Condition: "cue",
			Extra: map[string]string{"rt": strconv.FormatFloat(0.4+0.05*float64(k%7), 'g', -1, 64)}})
	}
	d, err := BuildDesign(DesignSpec{Volumes: 150, TR: 2, SliceRef: 0.5, Highpass: 128, Events: evs,
		Derivatives: []string{"time", "dispersion"}, Modulate: []Modulator{{"cue", "rt"}}})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"cue", "cue:time", "cue:dispersion", "cue:rt"}
	for i, w := range want {
		if d.Terms[i].Name != w {
			t.Fatalf("term %d is %s, want %s", i, d.Terms[i].Name, w)
		}
	}
	n, _ := d.X.Dims()
	main := make([]float64, n)
	mat.Col(main, 0, d.X)
	for j := 1; j < 4; j++ {
		c := make([]float64, n)
		mat.Col(c, j, d.X)
		if r := math.Abs(vdot(c, main)) / math.Sqrt(vdot(c, c)*vdot(main, main)); r > 1e-10 {
			t.Errorf("%s: |x'm|/(|x||m|) = %.3g", d.Terms[j].Name, r)
		}
	}
}

// TestSkipVolumesKeepsEarlyEvents: dropping the first volumes shifts the
// onsets and keeps events before the first kept volume, so the condition
// column equals the tail of the full run's column.
func TestSkipVolumesKeepsEarlyEvents(t *testing.T) {
	evs := []roi.Event{{Onset: 4, Duration: 2, Amplitude: 1, Condition: "a"}, {Onset: 40, Duration: 2, Amplitude: 1, Condition: "a"}}
	full, err := BuildDesign(DesignSpec{Volumes: 60, TR: 2, SliceRef: 0.5, Events: evs})
	if err != nil {
		t.Fatal(err)
	}
	const skip = 5
	shifted := []roi.Event{evs[0], evs[1]}
	for i := range shifted {
		shifted[i].Onset -= skip * 2
	}
	part, err := BuildDesign(DesignSpec{Volumes: 60 - skip, TR: 2, SliceRef: 0.5, Events: shifted})
	if err != nil {
		t.Fatal(err)
	}
	for v := 0; v < 60-skip; v++ {
		if d := math.Abs(part.X.At(v, 0) - full.X.At(v+skip, 0)); d > 1e-12 {
			t.Fatalf("volume %d: %.15g vs full run %.15g", v, part.X.At(v, 0), full.X.At(v+skip, 0))
		}
	}
	if part.X.At(0, 0) < 0.1 {
		t.Errorf("the response to the event before the first kept volume is lost: %g", part.X.At(0, 0))
	}
}

// TestCorrelatedConditionsWarn: two conditions whose events nearly coincide
// are flagged in the audit with the consequence in words.
func TestCorrelatedConditionsWarn(t *testing.T) {
	var evs []roi.Event
	for k := 0; k < 12; k++ {
		on := float64(10 + 20*k)
		evs = append(evs, roi.Event{Onset: on, Duration: 4, Amplitude: 1, Condition: "a"},
			roi.Event{Onset: on + 1, Duration: 4, Amplitude: 1, Condition: "b"})
	}
	d, err := BuildDesign(DesignSpec{Volumes: 130, TR: 2, SliceRef: 0.5, Highpass: 128, Events: evs})
	if err != nil {
		t.Fatal(err)
	}
	rows, warns := Audit("01_2", d, 10, nil, DefaultAuditThresholds)
	found := false
	for _, w := range warns {
		if strings.Contains(w, "`a` and `b` correlate at 0.9") && strings.Contains(w, "run 01_2") && strings.Contains(w, "their sum is not") {
			found = true
		}
	}
	if !found {
		t.Errorf("no correlation warning: %v", warns)
	}
	flagged := false
	for _, r := range rows {
		if r.Measure == "max_correlation" && r.Flag == "high" && r.Value > 0.9 {
			flagged = true
		}
	}
	if !flagged {
		t.Errorf("max_correlation not flagged: %v", rows)
	}
}

// TestCensorFD: volumes whose framewise displacement exceeds the threshold
// get one indicator term each, named by volume, and the baseline skips them.
func TestCensorFD(t *testing.T) {
	n := 80
	names := []string{"tx", "ty", "tz", "rx", "ry", "rz"}
	conf := &roi.Numeric{Path: "c.csv", Names: names}
	for j := range names {
		c := make([]float64, n)
		for i := range c {
			c[i] = 0.00001 * math.Sin(0.7*float64(i*(j+1))+float64(j))
		}
		conf.Cols = append(conf.Cols, c)
	}
	conf.Cols[0][30] += 2 // a jerk: FD > 0.5 at volumes 30 and 31
	sig := &roi.Numeric{Path: "s.csv", Names: []string{"r1"}, Cols: [][]float64{make([]float64, n)}}
	for i := range sig.Cols[0] {
		sig.Cols[0][i] = 100 + math.Sin(float64(i))
	}
	sig.Cols[0][30] = 1000 // an artefact in the censored volume
	run := &roi.Run{Spec: roi.RunSpec{Subject: "01", Run: "1", TR: 2}, Signals: sig, Confounds: conf,
		Events: &roi.Events{Events: []roi.Event{{Onset: 20, Duration: 10, Amplitude: 1, Condition: "a", Line: 2}, {Onset: 61, Duration: 10, Amplitude: 1, Condition: "a", Line: 3}}}}
	plans, err := Plan([]*roi.Run{run}, Options{SliceRef: 0.5, Highpass: 128, HRF: HRFDoubleGamma, CensorFD: 0.5, Noise: NoiseModel{Name: "none"}})
	if err != nil {
		t.Fatal(err)
	}
	d := plans[0].Design
	var cens []string
	for _, term := range d.Terms {
		if term.Kind == TermCensor {
			cens = append(cens, term.Name)
		}
	}
	if strings.Join(cens, ",") != "censor:30,censor:31" || d.CensoredCount() != 2 {
		t.Fatalf("censor terms %v (count %d), want censor:30,censor:31", cens, d.CensoredCount())
	}
	if fd := plans[0].FD[30]; math.Abs(fd-(math.Abs(conf.Cols[0][30]-conf.Cols[0][29])+fdRest(conf, 30))) > 1e-12 || fd < 2 {
		t.Errorf("FD[30] = %g", fd)
	}
	res, err := FitStudy(plans, Options{Noise: NoiseModel{Name: "none"}, Jobs: 1})
	if err != nil {
		t.Fatal(err)
	}
	base := res.Runs[0].Fit.Regions[0].Baseline
	mean := 0.0
	for i, v := range sig.Cols[0] {
		if i != 30 && i != 31 {
			mean += v / float64(n-2)
		}
	}
	if math.Abs(base-mean) > 1e-9 {
		t.Errorf("baseline %g, want the mean over kept volumes %g", base, mean)
	}
}

// fdRest is the framewise displacement at volume t from every column but tx.
func fdRest(conf *roi.Numeric, t int) float64 {
	s := 0.0
	for j := 1; j < 6; j++ {
		d := math.Abs(conf.Cols[j][t] - conf.Cols[j][t-1])
		if j >= 3 {
			d *= HeadRadius
		}
		s += d
	}
	return s
}

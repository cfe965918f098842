package fit

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

func ExampleSampleSize() {
	// Subjects for 80% power at two-sided alpha 0.05 for d = 0.5:
	// one sample, then per group for two groups.
	fmt.Println(SampleSize(0.5, 0.8, 0.05, 1), SampleSize(0.5, 0.8, 0.05, 2))
	// Output: 34 64
}

func TestHolmMissing(t *testing.T) {
	got := Holm([]float64{0.01, math.NaN(), 0.04, 0.03})
	want := []float64{0.03, math.NaN(), 0.06, 0.06}
	for i := range want {
		if !closeRel(got[i], want[i], tolAdjust) {
			t.Errorf("Holm[%d] = %g, want %g", i, got[i], want[i])
		}
	}
}

func TestSampleSizeEdges(t *testing.T) {
	if n := SampleSize(0, 0.8, 0.05, 1); n != 0 {
		t.Errorf("d = 0: n = %d, want 0 (unreachable)", n)
	}
	if a, b := SampleSize(-0.7, 0.9, 0.05, 2), SampleSize(0.7, 0.9, 0.05, 2); a != b || a == 0 {
		t.Errorf("two-sided power is symmetric in d: %d vs %d", a, b)
	}
	if n := SampleSize(1e-4, 0.8, 0.05, 2); n != 0 {
		t.Errorf("d = 1e-4 needs about 1.6e9 per group, above MaxSampleSize: n = %d, want 0", n)
	}
	if n := SampleSize(8, 0.8, 0.05, 1); n < 2 {
		t.Errorf("n = %d below the smallest sample of 2", n)
	}
}

// TestMixedEffectsBoundary: estimates that vary less than their standard
// errors imply give τ² = 0, and then the Knapp-Hartung fit is the weighted
// mean with weights 1/v.
func TestMixedEffectsBoundary(t *testing.T) {
	y := []float64{0.30, 0.31, 0.29, 0.30, 0.305}
	v := []float64{0.04, 0.01, 0.02, 0.03, 0.05}
	m, err := MixedEffects(mat.NewDense(5, 1, ones(5)), y, v)
	if err != nil {
		t.Fatal(err)
	}
	if m.Tau2 != 0 {
		t.Errorf("tau2 = %g, want exactly 0", m.Tau2)
	}
	sw, swy := 0.0, 0.0
	for i := range y {
		sw += 1 / v[i]
		swy += y[i] / v[i]
	}
	if !closeRel(m.Terms[0].Estimate, swy/sw, 1e-14) || m.Terms[0].DF != 4 {
		t.Errorf("estimate %g (df %g), want the inverse-variance mean %g (df 4)", m.Terms[0].Estimate, m.Terms[0].DF, swy/sw)
	}
}

// TestMixedEffectsScoreRoot: inside the parameter space the REML estimate
// zeroes the score y'PPy - tr P.
func TestMixedEffectsScoreRoot(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 1))
	k := 12
	y, v := make([]float64, k), make([]float64, k)
	x := mat.NewDense(k, 2, nil)
	for i := range y {
		v[i] = 0.01 + 0.05*rng.Float64()
		x.Set(i, 0, 1)
		x.Set(i, 1, float64(i)-5.5)
		y[i] = 0.2 + 0.01*x.At(i, 1) + 0.3*rng.NormFloat64() + math.Sqrt(v[i])*rng.NormFloat64()
	}
	m, err := MixedEffects(x, y, v)
	if err != nil {
		t.Fatal(err)
	}
	s, _ := remlScore(x, y, v, m.Tau2)
	s0, _ := remlScore(x, y, v, 0)
	// The score's scale is tr P, about (k - p)/(τ² + v): a root to 1e-10 of it.
	if !(m.Tau2 > 0) || math.Abs(s) > 1e-10*math.Abs(s0) {
		t.Errorf("tau2 = %g, score there %g (at 0: %g)", m.Tau2, s, s0)
	}
}

// TestDIntervalCoverage: over 4,000 samples of n = 8 from a normal
// population with d = 0.5 (seed 11), the 95% interval holds the true d in
// 95% of them, within the 99.9% binomial interval (±1.1%).
func TestDIntervalCoverage(t *testing.T) {
	const reps, n, d = 4000, 8, 0.5
	rng := rand.New(rand.NewPCG(11, 0))
	covered := 0
	y := make([]float64, n)
	for r := 0; r < reps; r++ {
		for i := range y {
			y[i] = d + rng.NormFloat64()
		}
		if e := CohenDOneSample(y); e.Low <= d && d <= e.High {
			covered++
		}
	}
	rate := float64(covered) / reps
	half := 3.29 * math.Sqrt(0.95*0.05/reps)
	if math.Abs(rate-0.95) > half {
		t.Errorf("coverage %.4f, want 0.95 ± %.4f", rate, half)
	}
}

// TestGroupTooFewSubjects: a sample that cannot be fitted is left out with
// a warning naming it; the others are analysed.
func TestGroupTooFewSubjects(t *testing.T) {
	spec := GroupSpec{Compare: "arm", Levels: [2]string{"a", "b"}, Subjects: map[string]Subject{
		"1": {Group: 0}, "2": {Group: 0}, "3": {Group: 1}, "4": {Group: 1}, "5": {Group: 1}}}
	res, err := Group([]GroupSample{
		{Contrast: "c", Region: "full", Subjects: []string{"1", "2", "3", "4", "5"}, Y: []float64{1, 2, 3, 4, 6}},
		{Contrast: "c", Region: "thin", Subjects: []string{"1", "3", "4"}, Y: []float64{1, 3, 4}},
	}, spec)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Rows) != 2 || res.Rows[0].Region != "full" || res.Rows[1].Term != "arm:b-a" || res.Rows[1].NA != 2 || res.Rows[1].NB != 3 {
		t.Errorf("rows %+v", res.Rows)
	}
	if len(res.Warnings) != 1 || !strings.Contains(res.Warnings[0], "contrast c, region thin: 1 subject(s) with arm a and 2 with arm b") {
		t.Errorf("warnings %q", res.Warnings)
	}
	// One region per (contrast, term): q and Holm's p equal p.
	for _, r := range res.Rows {
		if r.Q != r.PValue || r.PHolm != r.PValue {
			t.Errorf("%s: p %g, q %g, Holm %g", r.Term, r.PValue, r.Q, r.PHolm)
		}
	}
}

// TestGroupScaleInvariant: multiplying every subject's value (and standard
// error) by a power of two, however large or small, multiplies the
// estimate, its standard error by that number and τ² by its square, and
// leaves t, p and d as they are, bit for bit (power-of-two scaling is exact
// in binary arithmetic). Before the values were brought to unit scale,
// 2^520 (about 3e156) gave t = 0 and p = 1, and 2^-570 (about 3e-172) p = 0
// (found by an adversarial sweep). Plain and weighted models, with a
// comparison of two groups.
func TestGroupScaleInvariant(t *testing.T) {
	y := []float64{1.15, 0.42, 2.31, 0.97, 1.88, 0.25, 1.4, 0.6}
	se := []float64{0.3, 0.5, 0.4, 0.35, 0.6, 0.45, 0.5, 0.3}
	subj := []string{"a", "b", "c", "d", "e", "f", "g", "h"}
	info := map[string]Subject{}
	for i, s := range subj {
		info[s] = Subject{Group: i % 2}
	}
	for _, weighted := range []bool{false, true} {
		spec := GroupSpec{Compare: "arm", Levels: [2]string{"x", "y"}, Weighted: weighted, Subjects: info}
		base, err := Group([]GroupSample{{Contrast: "c", Region: "r", Subjects: subj, Y: y, SE: se}}, spec)
		if err != nil || len(base.Rows) != 2 {
			t.Fatalf("weighted %v: %v, %d rows", weighted, err, len(base.Rows))
		}
		for _, e := range []int{-570, -40, 3, 520} {
			c := math.Ldexp(1, e)
			res, err := Group([]GroupSample{{Contrast: "c", Region: "r", Subjects: subj, Y: scaled(y, c), SE: scaled(se, c)}}, spec)
			if err != nil || len(res.Rows) != 2 {
				t.Fatalf("weighted %v, 2^%d: %v", weighted, e, err)
			}
			for j, r := range res.Rows {
				b := base.Rows[j]
				same := func(what string, got, want float64) {
					if got != want && !(math.IsNaN(got) && math.IsNaN(want)) {
						t.Errorf("weighted %v, 2^%d, %s: %s %v, want %v", weighted, e, r.Term, what, got, want)
					}
				}
				same("estimate", r.Estimate, b.Estimate*c)
				same("std_error", r.StdError, b.StdError*c)
				same("tau2", r.Tau2, b.Tau2*c*c)
				same("t", r.Statistic, b.Statistic)
				same("p", r.PValue, b.PValue)
				same("d", r.Effect.D, b.Effect.D)
			}
		}
	}
}

// TestGroupConstantValues: subjects that all have the same value leave no
// spread to test against (a t of ±infinity or of rounding noise, p = 0);
// the sample is left out with a warning saying so.
func TestGroupConstantValues(t *testing.T) {
	for _, weighted := range []bool{false, true} {
		res, err := Group([]GroupSample{
			{Contrast: "c", Region: "flat", Subjects: []string{"a", "b", "c", "d"}, Y: []float64{0.1, 0.1, 0.1, 0.1}, SE: []float64{0.5, 0.5, 0.5, 0.5}},
			{Contrast: "c", Region: "varied", Subjects: []string{"a", "b", "c", "d"}, Y: []float64{0.1, 0.3, 0.2, 0.4}, SE: []float64{0.5, 0.5, 0.5, 0.5}},
		}, GroupSpec{Weighted: weighted})
		if err != nil {
			t.Fatal(err)
		}
		if len(res.Rows) != 1 || res.Rows[0].Region != "varied" {
			t.Errorf("weighted %v: rows %+v, want only region varied", weighted, res.Rows)
		}
		if len(res.Warnings) != 1 || !strings.Contains(res.Warnings[0], "region flat: every subject has the same value (0.1)") {
			t.Errorf("weighted %v: warnings %q", weighted, res.Warnings)
		}
	}
}

// TestGroupCollinearCovariates: a covariate that is the same for every
// subject, or one that repeats the groups of a comparison, is named in the
// warning (not "rank-deficient at column 2" of an internal design), and the
// warning is given once for all the samples it concerns. (Found by an
// adversarial sweep.)
func TestGroupCollinearCovariates(t *testing.T) {
	subj := []string{"a", "b", "c", "d", "e", "f"}
	y := []float64{1.2, 0.4, 2.3, 0.9, 1.9, 0.3}
	samples := []GroupSample{{Contrast: "c", Region: "r1", Subjects: subj, Y: y}, {Contrast: "c", Region: "r2", Subjects: subj, Y: y}}
	info := map[string]Subject{}
	for i, s := range subj {
		info[s] = Subject{Group: i % 2, Covariates: []float64{1, float64(i % 2)}}
	}
	res, err := Group(samples, GroupSpec{Covariates: []string{"site"}, Subjects: map[string]Subject{
		"a": {Covariates: []float64{1}}, "b": {Covariates: []float64{1}}, "c": {Covariates: []float64{1}},
		"d": {Covariates: []float64{1}}, "e": {Covariates: []float64{1}}, "f": {Covariates: []float64{1}}}})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Warnings) != 1 || !strings.Contains(res.Warnings[0], "covariate:site is the same for every subject") || !strings.Contains(res.Warnings[0], "left out for 2 contrast-region pairs") {
		t.Errorf("constant covariate: warnings %q", res.Warnings)
	}
	res, err = Group(samples, GroupSpec{Compare: "arm", Levels: [2]string{"x", "y"}, Covariates: []string{"site", "patient"}, Subjects: info})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Warnings) != 1 || !strings.Contains(res.Warnings[0], "covariate:site is the same") {
		t.Errorf("constant site with a comparison: warnings %q", res.Warnings)
	}
	for s, v := range info {
		v.Covariates = v.Covariates[1:] // patient only: the groups again
		info[s] = v
	}
	res, err = Group(samples, GroupSpec{Compare: "arm", Levels: [2]string{"x", "y"}, Covariates: []string{"patient"}, Subjects: info})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Warnings) != 1 || !strings.Contains(res.Warnings[0], "covariate:patient") || !strings.Contains(res.Warnings[0], "arm:y-x") || !strings.Contains(res.Warnings[0], "linear combinations") {
		t.Errorf("covariate repeating the groups: warnings %q", res.Warnings)
	}
}

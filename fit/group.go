package fit

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// GroupSample is what the group level gets for one contrast and region:
// one estimate per subject, with its standard error (needed only for the
// weighted model). Subjects without a usable value are left out before.
type GroupSample struct {
	Contrast, Region string
	Subjects         []string
	Y, SE            []float64
}

// Subject is what the between-subject model knows of one subject: its group
// (0 for the first level, 1 for the second) when there is a comparison, and
// its covariate values in GroupSpec.Covariates order.
type Subject struct {
	Group      int
	Covariates []float64
}

// GroupSpec says which between-subject model to fit.
type GroupSpec struct {
	Compare    string    // participants column of the two groups; "" for none
	Levels     [2]string // its levels: A (Group 0), then B (Group 1)
	Covariates []string  // participants columns, mean-centred in the model
	Weighted   bool      // mixed effects: REML τ², Knapp-Hartung
	// Subjects holds every subject's information when Compare or
	// Covariates is set; a sample's subjects must all be in it.
	Subjects map[string]Subject
}

// Term names of the group model.
const TermMean = "mean"

// CompareTerm is the term name of a two-group difference:
// COLUMN:LEVEL_B-LEVEL_A.
func (s GroupSpec) CompareTerm() string { return s.Compare + ":" + s.Levels[1] + "-" + s.Levels[0] }

// CovariateTerm is the term name of a covariate slope.
func CovariateTerm(name string) string { return "covariate:" + name }

// GroupRow is one row of the group results: a term of the model of one
// contrast and region.
type GroupRow struct {
	Contrast, Region, Term string
	N                      int // subjects in the model
	TTest
	Q, PHolm float64    // across regions within (contrast, term)
	Effect   EffectSize // Cohen's d; NaN for covariate slopes
	Tau2     float64    // REML between-subject variance; NaN unless weighted
	// Power is the pilot power of the term's effect; nil for covariate
	// slopes, which have no Cohen's d.
	Power *PilotPower
	// NA, NB are the group sizes of a two-group term (0 otherwise).
	NA, NB int
}

// PilotPower is the sample size a study would need to detect an observed
// effect, and the effect the current sample can detect.
type PilotPower struct {
	Groups       int // 1: one-sample test; 2: two groups, sizes per group
	NFor80       int // 0 when unreachable (d = 0) or above MaxSampleSize
	NFor90       int
	Detectable   float64 // smallest d with 80% power at the current n
	NFor80AtEdge int     // n for 80% at the interval's end nearer 0; 0 when the interval holds 0
}

// Power targets of the pilot table.
const (
	PowerLow  = 0.8
	PowerHigh = 0.9
)

// GroupResult is every row of a group analysis, in the order of the
// samples, then the terms (mean, the comparison, the covariates).
type GroupResult struct {
	Spec     GroupSpec
	Terms    []string
	Rows     []GroupRow
	Warnings []string
}

// Group fits the between-subject model of spec to every sample and adjusts
// the p values across regions within each (contrast, term): Benjamini and
// Hochberg's q and Holm's p.
//
// The model, per sample of n subjects with estimates y:
//   - no comparison, no covariates: the one-sample t test (OneSampleT);
//   - a comparison, no covariates: the `mean` row is the one-sample test of
//     all n subjects, the comparison row Welch's t of B minus A (WelchT);
//   - covariates: one linear model y = b0 + b_g (g - ḡ) + Σ b_c (x_c - x̄_c) + e
//     (g the 0/1 group indicator when there is a comparison; every column
//     mean-centred over the sample's subjects, so b0 is the mean of y), with
//     Student t inference (LinearModelT); rows mean, the comparison (a
//     covariate-adjusted difference, equal variances), covariate:NAME;
//   - weighted: the same designs (intercept only for the `mean` row when
//     there are no covariates) by MixedEffects with v_i = se_i².
//
// Cohen's d is always of the subject estimates themselves, unweighted and
// unadjusted: mean / sd for `mean`, the pooled-sd difference for a
// comparison. Samples too small for their model are skipped with a
// warning.
func Group(samples []GroupSample, spec GroupSpec) (*GroupResult, error) {
	res := &GroupResult{Spec: spec, Terms: []string{TermMean}}
	if spec.Compare != "" {
		res.Terms = append(res.Terms, spec.CompareTerm())
	}
	for _, c := range spec.Covariates {
		res.Terms = append(res.Terms, CovariateTerm(c))
	}
	// Samples left out for one reason are listed under it, once.
	var reasons []string
	where := map[string][]string{}
	for _, s := range samples {
		rows, warn, err := groupSample(s, spec, res.Terms)
		if err != nil {
			return nil, fmt.Errorf("contrast %s, region %s: %v", s.Contrast, s.Region, err)
		}
		if warn != "" {
			if _, ok := where[warn]; !ok {
				reasons = append(reasons, warn)
			}
			where[warn] = append(where[warn], fmt.Sprintf("contrast %s, region %s", s.Contrast, s.Region))
			continue
		}
		res.Rows = append(res.Rows, rows...)
	}
	for _, r := range reasons {
		at := where[r]
		if len(at) == 1 {
			res.Warnings = append(res.Warnings, fmt.Sprintf("%s: %s; left out", at[0], r))
			continue
		}
		list := at
		more := ""
		if len(at) > 4 {
			list, more = at[:3], fmt.Sprintf("; and %d more", len(at)-3)
		}
		res.Warnings = append(res.Warnings, fmt.Sprintf("%s; left out for %d contrast-region pairs (%s%s)", r, len(at), strings.Join(list, "; "), more))
	}
	adjustAcrossRegions(res.Rows)
	return res, nil
}

// adjustAcrossRegions sets Q and PHolm within each (contrast, term).
func adjustAcrossRegions(rows []GroupRow) {
	type key struct{ contrast, term string }
	var order []key
	members := map[key][]int{}
	for i, r := range rows {
		k := key{r.Contrast, r.Term}
		if _, ok := members[k]; !ok {
			order = append(order, k)
		}
		members[k] = append(members[k], i)
	}
	for _, k := range order {
		idx := members[k]
		p := make([]float64, len(idx))
		for j, i := range idx {
			p[j] = rows[i].PValue
		}
		q, h := BenjaminiHochberg(p), Holm(p)
		for j, i := range idx {
			rows[i].Q, rows[i].PHolm = q[j], h[j]
		}
	}
}

// groupSample fits one sample; a non-empty warning says why it cannot be.
//
// The values (and standard errors) are first multiplied by a power of two
// that brings the largest to [0.5, 1), and the estimates, standard errors
// and τ² scaled back: exact in binary arithmetic, so the results are those
// of the values as given, but squares of values beyond 1e154 no longer
// overflow (t = 0, p = 1) nor those below 1e-162 underflow (p = 0). A
// sample whose values are all the same has no spread to test against and
// is left out with a warning, as is a comparison whose two groups are each
// constant.
func groupSample(s GroupSample, spec GroupSpec, terms []string) ([]GroupRow, string, error) {
	n := len(s.Y)
	if n >= 2 && allEqual(s.Y) {
		return nil, fmt.Sprintf("every subject has the same value (%g), so there is no spread to test against", s.Y[0]), nil
	}
	scale := unitScale(s.Y)
	s.Y = scaled(s.Y, scale)
	if s.SE != nil {
		s.SE = scaled(s.SE, scale)
	}
	var a, b []float64 // the two groups' estimates
	if spec.Compare != "" {
		for i, subj := range s.Subjects {
			if spec.Subjects[subj].Group == 0 {
				a = append(a, s.Y[i])
			} else {
				b = append(b, s.Y[i])
			}
		}
		if len(a) < 2 || len(b) < 2 {
			return nil, fmt.Sprintf("%d subject(s) with %s %s and %d with %s %s, at least two per group needed",
				len(a), spec.Compare, spec.Levels[0], len(b), spec.Compare, spec.Levels[1]), nil
		}
		if allEqual(a) && allEqual(b) {
			return nil, fmt.Sprintf("the subjects with %s %s all have one value and those with %s %s another, so there is no spread to test against",
				spec.Compare, spec.Levels[0], spec.Compare, spec.Levels[1]), nil
		}
	}
	if n <= len(terms) || n < 2 {
		return nil, fmt.Sprintf("%d subject(s) cannot estimate %s", n, plural(len(terms), "term", "terms")), nil
	}
	var v []float64
	if spec.Weighted {
		v = make([]float64, n)
		for i, se := range s.SE {
			v[i] = se * se
		}
	}
	tests := make([]TTest, len(terms))
	tau2 := make([]float64, len(terms))
	for i := range tau2 {
		tau2[i] = math.NaN()
	}
	switch {
	case len(spec.Covariates) > 0:
		x := groupDesign(s, spec)
		if why := collinearTerms(x, terms); why != "" {
			return nil, why, nil
		}
		if spec.Weighted {
			m, err := MixedEffects(x, s.Y, v)
			if err != nil {
				return nil, err.Error(), nil
			}
			copy(tests, m.Terms)
			for i := range tau2 {
				tau2[i] = m.Tau2
			}
		} else {
			t, err := LinearModelT(x, s.Y)
			if err != nil {
				return nil, "the covariates are collinear for these subjects (" + err.Error() + ")", nil
			}
			copy(tests, t)
		}
	case spec.Weighted:
		m, err := MixedEffects(mat.NewDense(n, 1, ones(n)), s.Y, v)
		if err != nil {
			return nil, err.Error(), nil
		}
		tests[0], tau2[0] = m.Terms[0], m.Tau2
		if spec.Compare != "" {
			m, err := MixedEffects(groupDesign(s, spec), s.Y, v)
			if err != nil {
				return nil, err.Error(), nil
			}
			tests[1], tau2[1] = m.Terms[1], m.Tau2
		}
	default:
		tests[0] = OneSampleT(s.Y)
		if spec.Compare != "" {
			tests[1] = WelchT(a, b)
		}
	}
	for j := range tests {
		tests[j].Estimate /= scale
		tests[j].StdError /= scale
		tau2[j] /= scale * scale
	}
	rows := make([]GroupRow, len(terms))
	for j, term := range terms {
		r := GroupRow{Contrast: s.Contrast, Region: s.Region, Term: term, N: n, TTest: tests[j], Tau2: tau2[j],
			Effect: EffectSize{D: math.NaN(), Low: math.NaN(), High: math.NaN()}}
		switch {
		case j == 0:
			r.Effect = CohenDOneSample(s.Y)
			r.Power = pilotPower(r.Effect, n, 0)
		case j == 1 && spec.Compare != "":
			r.Effect = CohenDTwoSample(a, b)
			r.NA, r.NB = len(a), len(b)
			r.Power = pilotPower(r.Effect, len(a), len(b))
		}
		rows[j] = r
	}
	return rows, "", nil
}

// collinearTerms says, naming the terms, why the between-subject design x
// (columns in the order of terms) cannot be fitted: a term that is the same
// for every subject (zero after centring), or terms that are (nearly)
// linear combinations of each other, as CheckDesign finds them; "" when x
// can be fitted.
func collinearTerms(x *mat.Dense, terms []string) string {
	n, k := x.Dims()
	for j := 1; j < k; j++ {
		zero := true
		for i := 0; i < n; i++ {
			zero = zero && x.At(i, j) == 0
		}
		if zero {
			return fmt.Sprintf("%s is the same for every subject in the model, so it cannot be estimated; leave it out", terms[j])
		}
	}
	d := &Design{X: x}
	for _, t := range terms {
		d.Terms = append(d.Terms, Term{Name: t})
	}
	if _, err := CheckDesign("group", d); err != nil {
		var de *DesignError
		if errors.As(err, &de) {
			return fmt.Sprintf("%s are (nearly) linear combinations of each other for these subjects, so they cannot be told apart; leave one out", strings.Join(de.Terms, " and "))
		}
		return err.Error()
	}
	return ""
}

// allEqual reports whether every value of y is the same.
func allEqual(y []float64) bool {
	for _, v := range y {
		if v != y[0] {
			return false
		}
	}
	return true
}

// unitScale is the power of two that brings the largest |y_i| into
// [0.5, 1) (1 when they are all zero or one is not finite).
func unitScale(y []float64) float64 {
	m := 0.0
	for _, v := range y {
		m = math.Max(m, math.Abs(v))
	}
	if m == 0 || math.IsInf(m, 0) || math.IsNaN(m) {
		return 1
	}
	_, e := math.Frexp(m)
	return math.Ldexp(1, -e)
}

// scaled returns a copy of y times c.
func scaled(y []float64, c float64) []float64 {
	out := make([]float64, len(y))
	for i, v := range y {
		out[i] = v * c
	}
	return out
}

// groupDesign is the sample's between-subject design: intercept, then the
// group indicator (if any), then the covariates, every column but the
// intercept centred on its mean over the sample's subjects.
func groupDesign(s GroupSample, spec GroupSpec) *mat.Dense {
	n := len(s.Y)
	var cols [][]float64
	if spec.Compare != "" {
		g := make([]float64, n)
		for i, subj := range s.Subjects {
			g[i] = float64(spec.Subjects[subj].Group)
		}
		cols = append(cols, g)
	}
	for c := range spec.Covariates {
		x := make([]float64, n)
		for i, subj := range s.Subjects {
			x[i] = spec.Subjects[subj].Covariates[c]
		}
		cols = append(cols, x)
	}
	d := mat.NewDense(n, 1+len(cols), nil)
	for i := 0; i < n; i++ {
		d.Set(i, 0, 1)
	}
	for j, c := range cols {
		m := 0.0
		for _, x := range c {
			m += x
		}
		m /= float64(n)
		for i, x := range c {
			d.Set(i, j+1, x-m)
		}
	}
	return d
}

// pilotPower computes the power table of one effect: one sample of n1
// (n2 = 0) or two groups of n1 and n2.
func pilotPower(e EffectSize, n1, n2 int) *PilotPower {
	groups := 1
	if n2 > 0 {
		groups = 2
	}
	edge := math.NaN()
	switch {
	case e.Low > 0:
		edge = e.Low
	case e.High < 0:
		edge = e.High
	}
	p := &PilotPower{Groups: groups,
		NFor80:     SampleSize(e.D, PowerLow, PowerAlpha, groups),
		NFor90:     SampleSize(e.D, PowerHigh, PowerAlpha, groups),
		Detectable: DetectableEffect(n1, n2, PowerLow, PowerAlpha),
	}
	if !math.IsNaN(edge) {
		p.NFor80AtEdge = SampleSize(edge, PowerLow, PowerAlpha, groups)
	}
	return p
}

func ones(n int) []float64 {
	o := make([]float64, n)
	for i := range o {
		o[i] = 1
	}
	return o
}

func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return fmt.Sprintf("%d %s", n, many)
}

package fit

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/mat"

	"github.com/tessera-fmri/tessera/roi"
)

// TermKind says what a design column models.
type TermKind int

// Kinds of design terms, in the order they appear in a design.
const (
	TermCondition TermKind = iota
	TermDrift
	TermMotion
	TermConfound
	TermIntercept
)

// Term is one column of a design.
type Term struct {
	Name      string // condition name, drift:K, motion:COLUMN, confound:COLUMN, intercept
	Kind      TermKind
	Condition string // for condition terms
}

// Column is a named series of values, one per volume.
type Column struct {
	Name   string
	Values []float64
}

// DesignSpec is everything one run's design is built from.
type DesignSpec struct {
	Volumes  int
	TR       float64 // seconds
	SliceRef float64 // fraction of TR at which each volume is sampled
	Highpass float64 // seconds; 0 turns drift terms off
	HRF      string  // response model name; only double-gamma for now
	Events   []roi.Event
	Motion   []Column // the six rigid-body columns, or none
	Confound []Column // further named confounds
}

// Design is one run's design matrix and its term names.
type Design struct {
	X     *mat.Dense // Volumes × len(Terms)
	Terms []Term
	// Peak is, per condition, the peak of the unscaled modelled response to
	// one isolated event of the condition's median duration; each condition
	// column was divided by it.
	Peak map[string]float64
	// MedianDuration is, per condition, the duration used for the scaling.
	MedianDuration map[string]float64
	// Conditions lists condition names in design order.
	Conditions []string
}

// TermIndex returns the column of the named term, or -1.
func (d *Design) TermIndex(name string) int {
	for i, t := range d.Terms {
		if t.Name == name {
			return i
		}
	}
	return -1
}

// fineSteps returns m, the number of fine-grid steps per TR: at least 16
// (the contract's TR/16) and fine enough that a step is at most 0.1 s.
func fineSteps(tr float64) int {
	m := int(math.Ceil(tr / 0.1))
	if m < 16 {
		m = 16
	}
	return m
}

// BuildDesign builds the design of one run: condition regressors, cosine
// drift terms, motion and confound columns (mean-centred, never rescaled),
// then the intercept. Conditions appear sorted by name, so every run of a
// study has its condition terms in the same order.
func BuildDesign(s DesignSpec) (*Design, error) {
	if s.Volumes < 1 {
		return nil, fmt.Errorf("run has no volumes")
	}
	if s.HRF != "" && s.HRF != HRFDoubleGamma {
		return nil, fmt.Errorf("--hrf %q: expected %s", s.HRF, HRFDoubleGamma)
	}
	d := &Design{Peak: map[string]float64{}, MedianDuration: map[string]float64{}}
	var cols [][]float64

	byCond := map[string][]roi.Event{}
	for _, ev := range s.Events {
		if _, seen := byCond[ev.Condition]; !seen {
			d.Conditions = append(d.Conditions, ev.Condition)
		}
		byCond[ev.Condition] = append(byCond[ev.Condition], ev)
	}
	sort.Strings(d.Conditions)
	m := fineSteps(s.TR)
	dt := s.TR / float64(m)
	kernel := sampledResponse(dt)
	for _, c := range d.Conditions {
		evs := byCond[c]
		reg := convolvedRegressor(evs, s.Volumes, s.TR, s.SliceRef, m, kernel)
		med := medianDuration(evs)
		peak := isolatedPeak(med, dt, kernel)
		if peak <= 0 {
			return nil, fmt.Errorf("condition %q: its modelled response has no positive peak", c)
		}
		for i := range reg {
			reg[i] /= peak
		}
		d.Peak[c] = peak
		d.MedianDuration[c] = med
		cols = append(cols, reg)
		d.Terms = append(d.Terms, Term{Name: c, Kind: TermCondition, Condition: c})
	}
	for k, dc := range CosineDrift(s.Volumes, s.TR, s.Highpass) {
		cols = append(cols, dc)
		d.Terms = append(d.Terms, Term{Name: fmt.Sprintf("drift:%d", k+1), Kind: TermDrift})
	}
	add := func(c Column, prefix string, kind TermKind) error {
		if len(c.Values) != s.Volumes {
			return fmt.Errorf("%s column %q has %d values for %d volumes", prefix, c.Name, len(c.Values), s.Volumes)
		}
		mean := 0.0
		for t, v := range c.Values {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("%s column %q has a missing or non-finite value at volume %d (data row %d)", prefix, c.Name, t, t+1)
			}
			mean += v
		}
		mean /= float64(len(c.Values))
		v := make([]float64, len(c.Values))
		for t, x := range c.Values {
			v[t] = x - mean
		}
		cols = append(cols, v)
		d.Terms = append(d.Terms, Term{Name: prefix + ":" + c.Name, Kind: kind})
		return nil
	}
	for _, c := range s.Motion {
		if err := add(c, "motion", TermMotion); err != nil {
			return nil, err
		}
	}
	for _, c := range s.Confound {
		if err := add(c, "confound", TermConfound); err != nil {
			return nil, err
		}
	}
	one := make([]float64, s.Volumes)
	for i := range one {
		one[i] = 1
	}
	cols = append(cols, one)
	d.Terms = append(d.Terms, Term{Name: "intercept", Kind: TermIntercept})

	seen := map[string]bool{}
	for _, t := range d.Terms {
		if seen[t.Name] {
			return nil, fmt.Errorf("two design terms are both named %q", t.Name)
		}
		seen[t.Name] = true
	}
	d.X = mat.NewDense(s.Volumes, len(cols), nil)
	for j, c := range cols {
		d.X.SetCol(j, c)
	}
	return d, nil
}

// sampledResponse returns the convolution kernel on the fine grid:
// h_j = DoubleGamma((j - ½) dt), j >= 1, h_0 = 0, up to responseLength
// seconds. The input mass of grid cell c sits at its midpoint (c + ½) dt,
// so the response at grid time i·dt is sum_c u_c h_{i-c}: the midpoint rule,
// exact to O(dt²).
func sampledResponse(dt float64) []float64 {
	n := int(responseLength/dt) + 2
	h := make([]float64, n)
	for j := 1; j < n; j++ {
		h[j] = DoubleGamma((float64(j) - 0.5) * dt)
	}
	return h
}

// boxcarOnGrid adds an event's boxcar to the fine-grid input u (grid point i
// at time i*dt + origin), giving each grid cell [i*dt, (i+1)*dt) the share of
// it the event covers, so onsets and durations between grid points are kept.
// A zero-duration event is a brief impulse as long as one grid step.
func boxcarOnGrid(u []float64, onset, duration, amplitude, origin, dt float64) {
	if duration <= 0 {
		duration = dt
	}
	start := (onset - origin) / dt
	end := (onset + duration - origin) / dt
	i0 := int(math.Floor(start))
	i1 := int(math.Ceil(end))
	for i := max(i0, 0); i < i1 && i < len(u); i++ {
		lo := math.Max(float64(i), start)
		hi := math.Min(float64(i+1), end)
		if hi > lo {
			u[i] += amplitude * (hi - lo)
		}
	}
}

// convolve returns x_i = sum_j u_{i-j} h_j (the grid cell weights already
// carry the step length, so this is the Riemann sum of the convolution).
func convolve(u, h []float64) []float64 {
	x := make([]float64, len(u))
	for i, ui := range u {
		if ui == 0 {
			continue
		}
		for j := 0; j < len(h) && i+j < len(x); j++ {
			x[i+j] += ui * h[j]
		}
	}
	return x
}

// convolvedRegressor is one condition's regressor before scaling: the event
// boxcars (height amplitude) convolved with the response on the fine grid
// of m steps per TR and sampled at (n + sliceRef) * TR. Events may start
// before the first volume (negative onsets); their response still reaches
// the run.
func convolvedRegressor(evs []roi.Event, volumes int, tr, sliceRef float64, m int, h []float64) []float64 {
	dt := tr / float64(m)
	origin := 0.0
	for _, ev := range evs {
		origin = math.Min(origin, ev.Onset)
	}
	origin = math.Floor(origin/dt) * dt
	end := (float64(volumes) + 1) * tr
	u := make([]float64, int(math.Ceil((end-origin)/dt))+1)
	for _, ev := range evs {
		boxcarOnGrid(u, ev.Onset, ev.Duration, ev.Amplitude, origin, dt)
	}
	x := convolve(u, h)
	out := make([]float64, volumes)
	for n := range out {
		pos := ((float64(n)+sliceRef)*tr - origin) / dt
		i := int(math.Floor(pos))
		f := pos - float64(i)
		v := x[i]
		if f > 0 && i+1 < len(x) {
			v = (1-f)*x[i] + f*x[i+1]
		}
		out[n] = v
	}
	return out
}

// isolatedPeak is the peak of the modelled response to one event of the
// given duration and unit amplitude, on the same fine grid.
func isolatedPeak(duration, dt float64, h []float64) float64 {
	u := make([]float64, int(math.Ceil(duration/dt))+len(h)+1)
	boxcarOnGrid(u, 0, duration, 1, 0, dt)
	peak := 0.0
	for _, v := range convolve(u, h) {
		peak = math.Max(peak, v)
	}
	return peak
}

func medianDuration(evs []roi.Event) float64 {
	d := make([]float64, len(evs))
	for i, e := range evs {
		d[i] = e.Duration
	}
	sort.Float64s(d)
	n := len(d)
	if n%2 == 1 {
		return d[n/2]
	}
	return 0.5 * (d[n/2-1] + d[n/2])
}

// ConditionNumberLimit is the largest condition number of the
// column-equilibrated design that is fitted. Beyond it, float64 least
// squares loses more than half of its 16 digits (relative error about
// cond · 1e-16) and two or more terms are close to interchangeable.
const ConditionNumberLimit = 1e8

// DesignError reports a design that cannot be fitted, naming the terms
// involved.
type DesignError struct {
	Run       string
	Condition float64 // condition number of the equilibrated design (Inf when rank-deficient)
	Terms     []string
	Reason    string
}

func (e *DesignError) Error() string {
	return fmt.Sprintf("run %s: %s (condition number %.3g, limit %.0g); the terms most involved are %s: remove or combine them",
		e.Run, e.Reason, e.Condition, ConditionNumberLimit, strings.Join(e.Terms, ", "))
}

// CheckDesign refuses a design that is rank-deficient or numerically so. It
// scales each column to unit length (so units do not matter), takes the
// singular value decomposition, and names the terms with the largest weights
// in the right singular vector of the smallest singular value: the
// near-linear combination that makes the design degenerate.
func CheckDesign(run string, d *Design) (cond float64, err error) {
	n, k := d.X.Dims()
	if n <= k {
		return math.Inf(1), fmt.Errorf("run %s: %d volumes cannot estimate %d terms", run, n, k)
	}
	z := mat.DenseCopyOf(d.X)
	for j := 0; j < k; j++ {
		norm := mat.Norm(z.ColView(j), 2)
		if norm == 0 {
			return math.Inf(1), &DesignError{Run: run, Condition: math.Inf(1), Terms: []string{d.Terms[j].Name}, Reason: "a term is zero in every volume"}
		}
		for i := 0; i < n; i++ {
			z.Set(i, j, z.At(i, j)/norm)
		}
	}
	var svd mat.SVD
	if !svd.Factorize(z, mat.SVDThin) {
		return math.Inf(1), fmt.Errorf("run %s: the design's singular value decomposition failed", run)
	}
	sv := svd.Values(nil)
	cond = math.Inf(1)
	if sv[k-1] > 0 {
		cond = sv[0] / sv[k-1]
	}
	if cond <= ConditionNumberLimit {
		return cond, nil
	}
	var v mat.Dense
	svd.VTo(&v)
	type w struct {
		name string
		v    float64
	}
	var ws []w
	for j := 0; j < k; j++ {
		ws = append(ws, w{d.Terms[j].Name, math.Abs(v.At(j, k-1))})
	}
	sort.SliceStable(ws, func(a, b int) bool { return ws[a].v > ws[b].v })
	var names []string
	for _, x := range ws {
		if x.v >= 0.1 || len(names) < 2 {
			names = append(names, x.name)
		}
	}
	reason := "the design is numerically rank-deficient"
	if sv[k-1] <= rankTolerance(n, k)*sv[0] {
		reason = "the design is rank-deficient: some terms are exact combinations of others"
	}
	return cond, &DesignError{Run: run, Condition: cond, Terms: names, Reason: reason}
}

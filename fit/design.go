package fit

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/mat"

	"github.com/tessera-fmri/tessera/roi"
)

// TermKind says what a design column models.
type TermKind int

// Kinds of design terms, in the order they appear in a design.
const (
	TermCondition  TermKind = iota // a condition's main response
	TermDerivative                 // CONDITION:time or CONDITION:dispersion
	TermModulator                  // CONDITION:COLUMN, a parametric modulator
	TermFIR                        // CONDITION:bin:K
	TermDrift
	TermMotion
	TermConfound
	TermCensor // censor:VOLUME, one censored volume
	TermIntercept
)

// Term is one column of a design.
type Term struct {
	Name      string // condition name, CONDITION:time, drift:K, motion:COLUMN, censor:V, intercept, ...
	Kind      TermKind
	Condition string  // for condition, derivative, modulator and FIR terms
	Bin       int     // FIR bin, from 0
	Time      float64 // FIR: centre of the bin in seconds after onset
	Volume    int     // censor: the volume, counted from 0 among the kept volumes
}

// Column is a named series of values, one per volume.
type Column struct {
	Name   string
	Values []float64
}

// Modulator asks for a parametric regressor of Condition from the events
// column Column (--modulate CONDITION=COLUMN).
type Modulator struct {
	Condition, Column string
}

// Derivative names accepted by --hrf-derivatives.
const (
	DerivativeTime       = "time"
	DerivativeDispersion = "dispersion"
)

// DesignSpec is everything one run's design is built from.
type DesignSpec struct {
	Volumes  int
	TR       float64 // seconds
	SliceRef float64 // fraction of TR at which each volume is sampled
	Highpass float64 // seconds; 0 turns cosine drift terms off
	// Poly > 0 replaces the cosine drift terms by Legendre polynomials of
	// orders 1..Poly (--drift poly:K).
	Poly int
	HRF  string // double-gamma (default), gamma or fir
	// Derivatives adds, per condition, the double-gamma's time and/or
	// dispersion derivative, orthogonalised to the main term.
	Derivatives []string
	// FIRWindow (seconds) and FIRBins define the FIR bins with --hrf fir.
	FIRWindow float64
	FIRBins   int
	Modulate  []Modulator
	Events    []roi.Event
	Motion    []Column // the six rigid-body columns, or none
	// MotionTerms is 6 (as given), 12 (plus backward differences) or 24
	// (plus the squares of both); 0 means 6.
	MotionTerms int
	Confound    []Column // further named confounds
	// Censor marks volumes that get an indicator term each.
	Censor []bool
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
	// Censored marks the censored volumes (nil when none are).
	Censored []bool
	// Warnings are remarks about the design in plain words.
	Warnings []string
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

// ConditionTerms returns the columns of every term that belongs to the
// condition (main, derivatives, modulators, FIR bins).
func (d *Design) ConditionTerms(cond string) []int {
	var out []int
	for i, t := range d.Terms {
		if t.Condition == cond && t.Kind <= TermFIR {
			out = append(out, i)
		}
	}
	return out
}

// CensoredCount is the number of censored volumes.
func (d *Design) CensoredCount() int {
	n := 0
	for _, c := range d.Censored {
		if c {
			n++
		}
	}
	return n
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

// BuildDesign builds the design of one run: condition terms (per
// condition, sorted by name: the main response, then derivatives and
// modulators; or its FIR bins), drift terms, motion and confound columns
// (mean-centred, never rescaled), censor indicators, then the intercept.
func BuildDesign(s DesignSpec) (*Design, error) {
	if s.Volumes < 1 {
		return nil, fmt.Errorf("run has no volumes")
	}
	if !(s.TR >= roi.MinTR) || math.IsInf(s.TR, 0) {
		return nil, &optionError{fmt.Sprintf("TR %g s: expected a repetition time of at least %g s", s.TR, roi.MinTR)}
	}
	if s.Highpass > 0 && s.Highpass < 2*s.TR {
		return nil, &optionError{fmt.Sprintf("--highpass %g s is shorter than two volumes (2 TR = %g s), so its cosine terms would take every frequency of the run; use a longer period (128 s is common practice) or 0 for none", s.Highpass, 2*s.TR)}
	}
	switch s.HRF {
	case "", HRFDoubleGamma, HRFGamma, HRFFIR:
	default:
		return nil, fmt.Errorf("--hrf %q: expected %s, %s or %s", s.HRF, HRFDoubleGamma, HRFGamma, HRFFIR)
	}
	d := &Design{Peak: map[string]float64{}, MedianDuration: map[string]float64{}}
	b := &builder{d: d}

	byCond := map[string][]roi.Event{}
	for _, ev := range s.Events {
		if _, seen := byCond[ev.Condition]; !seen {
			d.Conditions = append(d.Conditions, ev.Condition)
		}
		byCond[ev.Condition] = append(byCond[ev.Condition], ev)
	}
	sort.Strings(d.Conditions)
	for _, m := range s.Modulate {
		if _, ok := byCond[m.Condition]; !ok {
			d.Warnings = append(d.Warnings, fmt.Sprintf("--modulate %s=%s: the run has no events of %q, so no modulator term", m.Condition, m.Column, m.Condition))
		}
	}
	if s.HRF == HRFFIR {
		if err := b.addFIR(s, byCond); err != nil {
			return nil, err
		}
	} else if err := b.addResponses(s, byCond); err != nil {
		return nil, err
	}
	if s.Poly > 0 {
		for k, c := range LegendreDrift(s.Volumes, s.Poly) {
			b.add(c, Term{Name: fmt.Sprintf("drift:%d", k+1), Kind: TermDrift})
		}
	} else {
		for k, c := range CosineDrift(s.Volumes, s.TR, s.Highpass) {
			b.add(c, Term{Name: fmt.Sprintf("drift:%d", k+1), Kind: TermDrift})
		}
	}
	motion, err := ExpandMotion(s.Motion, s.MotionTerms)
	if err != nil {
		return nil, err
	}
	for _, c := range motion {
		if err := b.addCentred(c, "motion", TermMotion, s.Volumes); err != nil {
			return nil, err
		}
	}
	for _, c := range s.Confound {
		if err := b.addCentred(c, "confound", TermConfound, s.Volumes); err != nil {
			return nil, err
		}
	}
	if s.Censor != nil {
		if len(s.Censor) != s.Volumes {
			panic("fit: censor mask does not match the volumes")
		}
		d.Censored = append([]bool(nil), s.Censor...)
		for v, c := range s.Censor {
			if c {
				ind := make([]float64, s.Volumes)
				ind[v] = 1
				b.add(ind, Term{Name: fmt.Sprintf("censor:%d", v), Kind: TermCensor, Volume: v})
			}
		}
	}
	one := make([]float64, s.Volumes)
	for i := range one {
		one[i] = 1
	}
	b.add(one, Term{Name: "intercept", Kind: TermIntercept})

	seen := map[string]bool{}
	for _, t := range d.Terms {
		if seen[t.Name] {
			return nil, fmt.Errorf("two design terms are both named %q", t.Name)
		}
		seen[t.Name] = true
	}
	d.X = mat.NewDense(s.Volumes, len(b.cols), nil)
	for j, c := range b.cols {
		d.X.SetCol(j, c)
	}
	return d, nil
}

// builder accumulates a design's columns and terms.
type builder struct {
	d    *Design
	cols [][]float64
}

func (b *builder) add(col []float64, t Term) {
	b.cols = append(b.cols, col)
	b.d.Terms = append(b.d.Terms, t)
}

// optionError is a problem with the run's TR or an option, which comes from
// no input file.
type optionError struct{ msg string }

func (e *optionError) Error() string { return e.msg }

// columnError is a problem with a motion or confound column, which comes
// from the run's confounds table.
type columnError struct{ msg string }

func (e *columnError) Error() string { return e.msg }

// addCentred adds a confound column, mean-centred and never rescaled.
func (b *builder) addCentred(c Column, prefix string, kind TermKind, volumes int) error {
	if len(c.Values) != volumes {
		return &columnError{fmt.Sprintf("%s column %q has %d values for %d volumes", prefix, c.Name, len(c.Values), volumes)}
	}
	mean := 0.0
	for t, v := range c.Values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return &columnError{fmt.Sprintf("%s column %q has a missing or non-finite value at volume %d (data row %d)", prefix, c.Name, t, t+1)}
		}
		if math.Abs(v) > maxTermMagnitude {
			return &columnError{fmt.Sprintf("%s column %q has %g at volume %d (data row %d), beyond ±1e100, where its squares overflow; no motion estimate or confound is that large in any unit: check the column", prefix, c.Name, v, t, t+1)}
		}
		mean += v
	}
	mean /= float64(len(c.Values))
	v := make([]float64, len(c.Values))
	for t, x := range c.Values {
		v[t] = x - mean
	}
	b.add(v, Term{Name: prefix + ":" + c.Name, Kind: kind})
	return nil
}

// addResponses adds each condition's convolved response, scaled to peak at
// 1 for one typical event, with its derivatives and modulators.
func (b *builder) addResponses(s DesignSpec, byCond map[string][]roi.Event) error {
	m := fineSteps(s.TR)
	dt := s.TR / float64(m)
	kernel := sampledResponse(responseFunc(s.HRF), dt)
	var derivKernels [][]float64
	for _, name := range s.Derivatives {
		if s.HRF == HRFGamma {
			return fmt.Errorf("--hrf-derivatives are defined for the %s response, not %s", HRFDoubleGamma, s.HRF)
		}
		switch name {
		case DerivativeTime:
			derivKernels = append(derivKernels, sampledResponse(DoubleGammaTimeDerivative, dt))
		case DerivativeDispersion:
			derivKernels = append(derivKernels, sampledResponse(DoubleGammaDispersionDerivative, dt))
		default:
			return fmt.Errorf("--hrf-derivatives %q: expected time or time,dispersion", name)
		}
	}
	for _, c := range b.d.Conditions {
		evs := byCond[c]
		reg := convolvedRegressor(evs, s.Volumes, s.TR, s.SliceRef, m, kernel)
		med := medianDuration(evs)
		peak := isolatedPeak(med, dt, kernel)
		if peak <= 0 {
			return fmt.Errorf("condition %q: its modelled response has no positive peak", c)
		}
		scale(reg, 1/peak)
		b.d.Peak[c] = peak
		b.d.MedianDuration[c] = med
		b.add(reg, Term{Name: c, Kind: TermCondition, Condition: c})
		for i, k := range derivKernels {
			dr := convolvedRegressor(evs, s.Volumes, s.TR, s.SliceRef, m, k)
			scale(dr, 1/peak)
			orthogonalise(dr, reg)
			b.add(dr, Term{Name: c + ":" + s.Derivatives[i], Kind: TermDerivative, Condition: c})
		}
		for _, mod := range s.Modulate {
			if mod.Condition != c {
				continue
			}
			mev, warn, err := modulatedEvents(evs, mod)
			if err != nil {
				return err
			}
			if warn != "" {
				b.d.Warnings = append(b.d.Warnings, warn)
			}
			mr := convolvedRegressor(mev, s.Volumes, s.TR, s.SliceRef, m, kernel)
			scale(mr, 1/peak)
			orthogonalise(mr, reg)
			b.add(mr, Term{Name: c + ":" + mod.Column, Kind: TermModulator, Condition: c})
		}
	}
	return nil
}

// modulatedEvents returns the condition's events with amplitude the
// modulator value minus its mean within the condition (Büchel et al. 1998,
// NeuroImage 8:140-148, parametric modulation). Events whose value is
// missing get the mean (amplitude 0), with a warning naming their lines.
func modulatedEvents(evs []roi.Event, mod Modulator) ([]roi.Event, string, error) {
	vals := make([]float64, len(evs))
	var missing []string
	sum, n := 0.0, 0
	for i, ev := range evs {
		text, ok := ev.Extra[mod.Column]
		if !ok {
			return nil, "", fmt.Errorf("--modulate %s=%s: the events table has no column %q", mod.Condition, mod.Column, mod.Column)
		}
		text = strings.TrimSpace(text)
		if text == "" || text == "n/a" || text == "NA" || text == "NaN" || text == "nan" {
			vals[i] = math.NaN()
			missing = append(missing, fmt.Sprint(ev.Line))
			continue
		}
		v, err := strconv.ParseFloat(text, 64)
		if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
			return nil, "", fmt.Errorf("events line %d: column %q has %q; expected a number for --modulate %s=%s", ev.Line, mod.Column, text, mod.Condition, mod.Column)
		}
		vals[i] = v
		sum += v
		n++
	}
	if n == 0 {
		return nil, "", fmt.Errorf("--modulate %s=%s: every event of %q has a missing %s", mod.Condition, mod.Column, mod.Condition, mod.Column)
	}
	mean := sum / float64(n)
	out := make([]roi.Event, len(evs))
	for i, ev := range evs {
		out[i] = ev
		out[i].Amplitude = 0
		if !math.IsNaN(vals[i]) {
			out[i].Amplitude = vals[i] - mean
		}
	}
	warn := ""
	if len(missing) > 0 {
		warn = fmt.Sprintf("--modulate %s=%s: events on lines %s have no value and were given the condition's mean", mod.Condition, mod.Column, strings.Join(missing, ", "))
	}
	return out, warn, nil
}

// addFIR adds N bins per condition: bin K is 1 in a volume sampled between
// K·w and (K+1)·w seconds after an event's onset (w = window/N), summed
// over events and weighted by amplitude; durations are not used. An
// estimate is then the response K·w to (K+1)·w seconds after onset, in
// signal units (Glover 1999 discusses FIR estimation of the response).
func (b *builder) addFIR(s DesignSpec, byCond map[string][]roi.Event) error {
	if s.FIRBins < 1 || s.FIRWindow <= 0 {
		return fmt.Errorf("--hrf fir needs --fir-window S > 0 and --fir-bins N >= 1 (found %g and %d)", s.FIRWindow, s.FIRBins)
	}
	if len(s.Derivatives) > 0 || len(s.Modulate) > 0 {
		return fmt.Errorf("--hrf fir does not combine with --hrf-derivatives or --modulate")
	}
	w := s.FIRWindow / float64(s.FIRBins)
	for _, c := range b.d.Conditions {
		bins := make([][]float64, s.FIRBins)
		for k := range bins {
			bins[k] = make([]float64, s.Volumes)
		}
		for _, ev := range byCond[c] {
			for n := 0; n < s.Volumes; n++ {
				lag := (float64(n)+s.SliceRef)*s.TR - ev.Onset
				if lag < 0 || lag >= s.FIRWindow {
					continue
				}
				k := min(int(lag/w), s.FIRBins-1)
				bins[k][n] += ev.Amplitude
			}
		}
		for k, col := range bins {
			b.add(col, Term{Name: fmt.Sprintf("%s:bin:%d", c, k), Kind: TermFIR, Condition: c, Bin: k, Time: (float64(k) + 0.5) * w})
		}
	}
	return nil
}

func scale(x []float64, f float64) {
	for i := range x {
		x[i] *= f
	}
}

// orthogonalise removes from x its projection on y: x ← x - (x'y / y'y) y.
func orthogonalise(x, y []float64) {
	xy, yy := 0.0, 0.0
	for i := range x {
		xy += x[i] * y[i]
		yy += y[i] * y[i]
	}
	if yy == 0 {
		return
	}
	f := xy / yy
	for i := range x {
		x[i] -= f * y[i]
	}
}

// sampledResponse returns the convolution kernel of response f on the fine
// grid: h_j = f((j - ½) dt), j >= 1, h_0 = 0, up to responseLength
// seconds. The input mass of grid cell c sits at its midpoint (c + ½) dt,
// so the response at grid time i·dt is sum_c u_c h_{i-c}: the midpoint rule,
// exact to O(dt²).
func sampledResponse(f func(float64) float64, dt float64) []float64 {
	n := int(responseLength/dt) + 2
	h := make([]float64, n)
	for j := 1; j < n; j++ {
		h[j] = f((float64(j) - 0.5) * dt)
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

// maxTermMagnitude bounds the size of a design column's values (and
// 1/maxTermMagnitude that of a column that is not zero): squares and the
// products of the fit must stay within double precision's range (1e±308)
// with room for the data's own scale. No unit of an fMRI regressor comes
// near it; common practice, not a published limit.
const maxTermMagnitude = 1e100

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
	for j := 0; j < k; j++ {
		m := 0.0
		for i := 0; i < n; i++ {
			m = math.Max(m, math.Abs(d.X.At(i, j)))
		}
		if m > maxTermMagnitude || (m > 0 && m < 1/maxTermMagnitude) {
			return math.Inf(1), fmt.Errorf("run %s: term %q is %.3g in size at its largest, outside 1e-100 to 1e100, where its squares and products overflow or vanish in double precision; rescale what it is made from (an event amplitude, a confound column)",
				run, d.Terms[j].Name, m)
		}
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

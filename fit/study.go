package fit

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sort"
	"strings"
	"sync"
	"sync/atomic"

	"github.com/tessera-fmri/tessera/roi"
)

// Options are the model flags shared by every run of a fit.
type Options struct {
	TR        float64 // seconds; 0 takes each run's TR from the study table
	SliceRef  float64 // fraction of TR
	HRF       string
	Highpass  float64 // seconds
	Noise     NoiseModel
	Contrasts []Contrast // empty: one per condition, named after it
	// StudyConditions, when not nil, holds the conditions of the whole
	// study while only part of it is planned (a --shard): a contrast or F
	// test may then name a condition this part lacks, or a term of one
	// (CONDITION:...), which the parts that have the condition check, so
	// that every shard accepts what the unsharded fit accepts.
	StudyConditions []string
	// Motion names the six rigid-body columns; nil takes tx,ty,tz,rx,ry,rz
	// where all six exist in a run's confounds table.
	Motion    []string
	Confounds []string
	Jobs      int

	// Design options (see DesignSpec).
	Poly        int // --drift poly:K
	Derivatives []string
	FIRWindow   float64
	FIRBins     int
	Modulate    []Modulator
	MotionTerms int
	// RotationDegrees says the rotation columns are in degrees (for
	// framewise displacement only; the columns enter the design as given).
	RotationDegrees bool
	// CensorFD > 0 censors volumes whose framewise displacement exceeds it
	// (mm).
	CensorFD float64
	// SkipVolumes drops the first volumes of every run; onsets stay
	// relative to the original first volume.
	SkipVolumes int
	// MissingCensor censors, for every region of the run, each volume
	// where some region's signal is missing or non-finite (read as NaN by
	// roi with LoadOptions.MissingCensor); without it such a value is an
	// error at read time.
	MissingCensor bool
	FTests        []FTest
	Audit         AuditThresholds
	// Progress, when set, is called after each run is fitted with the
	// number of runs done and the total; calls are serialised.
	Progress func(done, total int)
}

// DefaultMotion are the motion columns taken when --motion is not given.
var DefaultMotion = []string{"tx", "ty", "tz", "rx", "ry", "rz"}

// RunPlan is one run ready to fit: its inputs, its design and what the
// design check found.
type RunPlan struct {
	Run       *roi.Run
	TR        float64
	Design    *Design
	Condition float64 // condition number of the equilibrated design
	Events    map[string]int
	Warnings  []string
	// Regions and Y are the region names and signals over the kept volumes
	// (after --skip-volumes).
	Regions []string
	Y       [][]float64
	// FD is the framewise displacement per kept volume (nil without
	// motion columns).
	FD    []float64
	Audit []AuditRow
	// Volumes is the number of kept volumes, TotalVolumes the number read.
	Volumes, TotalVolumes int
	// Skip says why the run is not fitted: SkipVolumes or SkipNoise; empty
	// when it is fitted.
	Skip string
	// NoValues names the regions with no value in any volume (under
	// --missing censor, they censor the whole run).
	NoValues []string

	skip    int
	missing []bool // volumes censored because a signal value is missing
	reload  func() (*roi.Numeric, error)
}

// Release drops the run's signals from memory after planning; Signals reads
// them again with reload when the run is fitted. A study too large to hold
// is then in memory one run (per worker) at a time. Released runs also drop
// each region's covariance matrix once contrasts and F tests are computed.
func (p *RunPlan) Release(reload func() (*roi.Numeric, error)) {
	p.reload = reload
	p.Y = nil
	p.Run.Signals = &roi.Numeric{Path: p.Run.Signals.Path, Names: p.Run.Signals.Names}
}

// Signals returns the region signals over the kept volumes, reading them
// again if the run was released.
func (p *RunPlan) Signals() ([][]float64, error) {
	if p.Y != nil || p.reload == nil {
		return p.Y, nil
	}
	sig, err := p.reload()
	if err != nil {
		return nil, err
	}
	if sig.Rows() != p.TotalVolumes || len(sig.Cols) != len(p.Regions) {
		return nil, fmt.Errorf("%s changed while it was being analysed (%d rows, %d columns; it had %d and %d)", sig.Path, sig.Rows(), len(sig.Cols), p.TotalVolumes, len(p.Regions))
	}
	y := make([][]float64, len(sig.Cols))
	for i, c := range sig.Cols {
		y[i] = c[p.skip:]
	}
	if p.missing != nil {
		y = fillMissing(y, p.missing)
	}
	return y, nil
}

// Plan builds and checks the design of every run. Any run whose design
// cannot be built or is refused by CheckDesign makes Plan fail with every
// such problem listed; a run with too few volumes for its terms is kept and
// skipped at fit time (it is reported in diagnostics).
func Plan(runs []*roi.Run, o Options) ([]*RunPlan, error) {
	var plans []*RunPlan
	var problems []string
	for _, r := range runs {
		p, err := planRun(r, o)
		if err != nil {
			problems = append(problems, err.Error())
			continue
		}
		plans = append(plans, p)
	}
	if len(problems) > 0 {
		return nil, fmt.Errorf("%s", strings.Join(problems, "\n"))
	}
	return FinishPlan(plans, o)
}

// PlanRun builds and checks one run's design, for callers that read and
// plan runs one at a time (and may Release each); FinishPlan then does the
// checks that span runs.
func PlanRun(r *roi.Run, o Options) (*RunPlan, error) { return planRun(r, o) }

// FinishPlan checks the contrasts against the study's conditions and
// completes the design audit across runs (relative efficiency).
func FinishPlan(plans []*RunPlan, o Options) ([]*RunPlan, error) {
	if err := checkContrasts(plans, o.Contrasts, o.FTests, o.StudyConditions); err != nil {
		return nil, err
	}
	if len(o.Derivatives) > 0 || o.HRF == HRFFIR {
		// Every condition then gets an F test named after it (FitStudy).
		conds := o.StudyConditions
		if conds == nil {
			conds = Conditions(plans)
		}
		for _, f := range o.FTests {
			for _, c := range conds {
				if f.Name == c {
					return nil, fmt.Errorf("F test %q has the name of condition %q's own F test, which every condition gets with --hrf fir or --hrf-derivatives; give it another name", f.Name, c)
				}
			}
		}
	}
	foreignConditionWarnings(plans)
	cs := o.Contrasts
	if len(cs) == 0 {
		cs = DefaultContrasts(plans)
	}
	th := o.Audit
	if th == (AuditThresholds{}) {
		th = DefaultAuditThresholds
	}
	best := map[string]float64{}
	for _, p := range plans {
		rows, warns := Audit(p.Run.Spec.Key(), p.Design, p.Condition, cs, th)
		p.Audit = rows
		p.Warnings = append(p.Warnings, warns...)
		for _, r := range rows {
			if r.Measure == "efficiency" {
				best[r.Item] = math.Max(best[r.Item], r.Value)
			}
		}
	}
	for _, p := range plans {
		var rel []AuditRow
		for _, r := range p.Audit {
			if r.Measure == "efficiency" && best[r.Item] > 0 {
				rel = append(rel, AuditRow{Item: r.Item, Measure: "relative_efficiency", Value: r.Value / best[r.Item]})
			}
		}
		p.Audit = append(p.Audit, rel...)
	}
	return plans, nil
}

func planRun(r *roi.Run, o Options) (*RunPlan, error) {
	tr := r.Spec.TR
	if o.TR > 0 {
		tr = o.TR
	}
	key := r.Spec.Key()
	total := r.Signals.Rows()
	skip := o.SkipVolumes
	if skip >= total {
		return nil, fmt.Errorf("run %s: --skip-volumes %d leaves none of its %d volumes", key, skip, total)
	}
	n := total - skip
	spec := DesignSpec{Volumes: n, TR: tr, SliceRef: o.SliceRef, Highpass: o.Highpass, Poly: o.Poly, HRF: o.HRF,
		Derivatives: o.Derivatives, FIRWindow: o.FIRWindow, FIRBins: o.FIRBins, Modulate: o.Modulate, MotionTerms: o.MotionTerms}
	p := &RunPlan{Run: r, TR: tr, Events: map[string]int{}, Regions: r.Signals.Names, Volumes: n, TotalVolumes: total, skip: skip}
	p.Y = make([][]float64, len(r.Signals.Cols))
	for i, c := range r.Signals.Cols {
		p.Y[i] = c[skip:]
	}
	missing := missingVolumes(p.Y)
	if missing != nil {
		if !o.MissingCensor {
			return nil, fmt.Errorf("run %s: %s has missing or non-finite values; use --missing censor to censor those volumes", key, r.Spec.Signals)
		}
		// Which regions the missing values are in, the most first: one
		// region with no value at all censors every volume of the run.
		type count struct {
			region string
			n      int
		}
		var counts []count
		for i, c := range p.Y {
			k := 0
			for _, v := range c {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					k++
				}
			}
			if k > 0 {
				counts = append(counts, count{p.Regions[i], k})
			}
		}
		sort.SliceStable(counts, func(a, b int) bool { return counts[a].n > counts[b].n })
		var in []string
		for _, c := range counts {
			in = append(in, fmt.Sprintf("%s %d of %d", c.region, c.n, len(p.Y[0])))
		}
		p.Y = fillMissing(p.Y, missing)
		p.missing = missing
		var vols []string
		for v, m := range missing {
			if m {
				vols = append(vols, fmt.Sprint(v+skip))
			}
		}
		p.Warnings = append(p.Warnings, fmt.Sprintf("run %s: volumes %s have missing or non-finite signal values and are censored for every region (missing in %s)", key, joinMax(vols, 20), joinMax(in, 5)))
		for _, c := range counts {
			if c.n == len(p.Y[0]) {
				p.NoValues = append(p.NoValues, c.region)
			}
		}
		switch len(p.NoValues) {
		case 0:
		case 1:
			p.Warnings = append(p.Warnings, fmt.Sprintf("run %s: region %s has no value in any volume, so censoring leaves nothing to fit; remove its column from the signals table", key, p.NoValues[0]))
		default:
			p.Warnings = append(p.Warnings, fmt.Sprintf("run %s: regions %s have no value in any volume, so censoring leaves nothing to fit; remove their columns from the signals table", key, joinMax(p.NoValues, 5)))
		}
	}
	if r.Events != nil {
		shift := float64(skip) * tr
		for _, e := range r.Events.Events {
			e.Onset -= shift
			spec.Events = append(spec.Events, e)
			p.Events[e.Condition]++
		}
	}
	where := r.Spec.Confounds
	pick := func(names []string) ([]Column, error) {
		var cols []Column
		for _, name := range names {
			var v []float64
			if r.Confounds != nil {
				v = r.Confounds.Column(name)
			}
			if v == nil {
				if r.Confounds == nil {
					return nil, fmt.Errorf("run %s: column %q was asked for but the run has no confounds table", key, name)
				}
				return nil, &roi.InputError{File: where, Line: 1, Found: fmt.Sprintf("no column %q", name),
					Expected: "one of the header's columns: " + strings.Join(r.Confounds.Names, ", ")}
			}
			v = v[skip:]
			for t, x := range v {
				if math.IsNaN(x) {
					return nil, &roi.InputError{File: where, Line: t + skip + 2, Column: columnIndex(r.Confounds.Names, name) + 1, Field: name,
						Found: fmt.Sprintf("a missing value (volume %d)", t+skip), Expected: "a number in every row of a column the model uses"}
				}
			}
			cols = append(cols, Column{Name: name, Values: v})
		}
		return cols, nil
	}
	var err error
	motion := o.Motion
	if motion == nil && r.Confounds != nil {
		all := true
		for _, m := range DefaultMotion {
			if r.Confounds.Column(m) == nil {
				all = false
			}
		}
		if all {
			motion = DefaultMotion
		}
	}
	if spec.Motion, err = pick(motion); err != nil {
		return nil, err
	}
	if spec.Confound, err = pick(o.Confounds); err != nil {
		return nil, err
	}
	if len(spec.Motion) == 6 {
		m := make([][]float64, 6)
		for i, c := range spec.Motion {
			m[i] = c.Values
		}
		p.FD = FramewiseDisplacement(m, o.RotationDegrees)
		if o.CensorFD > 0 {
			spec.Censor = make([]bool, n)
			for t, fd := range p.FD {
				spec.Censor[t] = fd > o.CensorFD
			}
		}
	} else if o.CensorFD > 0 {
		return nil, fmt.Errorf("run %s: --censor-fd needs the six motion columns, and the run has none (give --motion or a confounds table with tx,ty,tz,rx,ry,rz)", key)
	}
	if missing != nil {
		if spec.Censor == nil {
			spec.Censor = make([]bool, n)
		}
		for v, m := range missing {
			spec.Censor[v] = spec.Censor[v] || m
		}
	}
	d, err := BuildDesign(spec)
	if err != nil {
		var ce *columnError
		var oe *optionError
		switch {
		case errors.As(err, &oe):
			return nil, fmt.Errorf("run %s: %v", key, err)
		case errors.As(err, &ce) && r.Spec.Confounds != "":
			return nil, fmt.Errorf("run %s (%s): %v", key, r.Spec.Confounds, err)
		}
		if !errors.As(err, &ce) && r.Spec.Events != "" {
			return nil, fmt.Errorf("run %s (%s): %v", key, r.Spec.Events, err)
		}
		return nil, fmt.Errorf("run %s: %v", key, err)
	}
	p.Design = d
	for _, w := range d.Warnings {
		p.Warnings = append(p.Warnings, fmt.Sprintf("run %s: %s", key, w))
	}
	th := o.Audit
	if th == (AuditThresholds{}) {
		th = DefaultAuditThresholds
	}
	p.Warnings = append(p.Warnings, EventWarnings(key, spec.Events, tr, n, skip, d.Censored, th.MinEvents)...)
	rows, k := d.X.Dims()
	if rows <= k {
		p.Warnings = append(p.Warnings, fmt.Sprintf("run %s has %d volumes for %d terms and is skipped", key, rows, k))
		p.Condition = math.Inf(1)
		p.Skip = SkipVolumes
		return p, nil
	}
	cond, err := CheckDesign(key, d)
	if err != nil {
		return nil, err
	}
	p.Condition = cond
	if err := CheckNoise(d, o.Noise.ForTR(tr)); err != nil {
		// Like a run with too few volumes, the run is left out with a
		// warning rather than the whole study refused.
		p.Warnings = append(p.Warnings, fmt.Sprintf("run %s is skipped: %v", key, err))
		p.Skip = SkipNoise
	}
	return p, nil
}

// Reasons for skipping a run (RunPlan.Skip).
const (
	SkipVolumes = "too few volumes"
	SkipNoise   = "too few residual degrees of freedom for the noise model"
)

// Skipped reports whether the run is not fitted (see Skip).
func (p *RunPlan) Skipped() bool { return p.Skip != "" }

// Conditions returns every condition name of the study, sorted.
func Conditions(plans []*RunPlan) []string {
	set := map[string]bool{}
	for _, p := range plans {
		for _, c := range p.Design.Conditions {
			set[c] = true
		}
	}
	var out []string
	for c := range set {
		out = append(out, c)
	}
	sort.Strings(out)
	return out
}

// DefaultContrasts returns one contrast per condition, named after it.
func DefaultContrasts(plans []*RunPlan) []Contrast {
	var cs []Contrast
	for _, c := range Conditions(plans) {
		cs = append(cs, Contrast{Name: c, Expr: c, Names: []string{c}, Weights: []float64{1}})
	}
	return cs
}

// KnownNames returns every name a contrast may use: conditions and the
// names of condition-related terms (derivatives, modulators, FIR bins).
func KnownNames(plans []*RunPlan) []string {
	set := map[string]bool{}
	for _, c := range Conditions(plans) {
		set[c] = true
	}
	for _, p := range plans {
		for _, t := range p.Design.Terms {
			if t.Kind <= TermFIR {
				set[t.Name] = true
			}
		}
	}
	var out []string
	for n := range set {
		out = append(out, n)
	}
	sort.Strings(out)
	return out
}

func checkContrasts(plans []*RunPlan, cs []Contrast, fts []FTest, study []string) error {
	known := KnownNames(plans)
	if study != nil {
		// Names of conditions absent from these runs, and of their terms,
		// are left to the runs that have them (see Options.StudyConditions):
		// they count as known here.
		here := map[string]bool{}
		for _, c := range Conditions(plans) {
			here[c] = true
		}
		set := map[string]bool{}
		for _, k := range known {
			set[k] = true
		}
		elsewhere := func(n string) bool {
			for _, c := range study {
				if !here[c] && (n == c || strings.HasPrefix(n, c+":")) {
					return true
				}
			}
			return false
		}
		add := func(c Contrast) {
			for _, n := range c.Names {
				if !set[n] && elsewhere(n) {
					set[n] = true
					known = append(known, n)
				}
			}
		}
		for _, c := range cs {
			add(c)
		}
		for _, f := range fts {
			for _, r := range f.Rows {
				add(r)
			}
		}
	}
	zero := func(c Contrast) bool {
		for _, w := range c.Weights {
			if w != 0 {
				return false
			}
		}
		return true
	}
	seenF := map[string]bool{}
	for _, f := range fts {
		if seenF[f.Name] {
			return fmt.Errorf("two F tests are named %q; give each its own name", f.Name)
		}
		seenF[f.Name] = true
		for _, r := range f.Rows {
			if zero(r) {
				return fmt.Errorf("F test %q has a row %q whose weights are all zero, which tests nothing; remove it", f.Name, r.Expr)
			}
		}
		if err := f.Check(known); err != nil {
			return err
		}
	}
	seen := map[string]bool{}
	for _, c := range cs {
		if seen[c.Name] {
			return fmt.Errorf("two contrasts are named %q; give each its own name", c.Name)
		}
		seen[c.Name] = true
		if zero(c) {
			return fmt.Errorf("contrast %q (%s) has weights that are all zero, so it estimates nothing; give it a condition with a weight that is not 0", c.Name, c.Expr)
		}
		if err := c.Check(known); err != nil {
			return err
		}
	}
	return nil
}

// RunResult is the fit of one run with its contrasts.
type RunResult struct {
	Plan *RunPlan
	Fit  *RunFit // nil when the run was skipped
	// Contrasts[c][r] is contrast c in region r; Valid[c] is false when the
	// run lacks a condition the contrast needs.
	Contrasts [][]ContrastFit
	Valid     []bool
	// Q[c][r] is the BH q value across the regions of this run.
	Q [][]float64
	// FTests[f][r] is F test f in region r, FValid[f] false when the run
	// lacks a name the test needs; FQ[f][r] its BH q value.
	FTests   [][]FTestFit
	FValid   []bool
	FQ       [][]float64
	Warnings []string
}

// SubjectResult is the fixed-effects combination of a subject's runs for one
// contrast and region.
type SubjectResult struct {
	Subject, Region, Contrast string
	Runs                      int
	ContrastFit
	Q float64
}

// StudyResult is everything a study fit produced.
type StudyResult struct {
	Options   Options
	Runs      []*RunResult
	Subjects  []SubjectResult
	Contrasts []Contrast
	// FTests are the F tests: those given, then one per condition when the
	// model has derivatives or FIR bins (Rows empty: all of the
	// condition's terms).
	FTests   []FTest
	Warnings []string
}

// Interrupted is returned when a fit was cancelled: Done of Total runs
// had been fitted.
type Interrupted struct{ Done, Total int }

func (e *Interrupted) Error() string {
	return fmt.Sprintf("interrupted after fitting %d of %d runs", e.Done, e.Total)
}

// FitStudy fits every planned run (in parallel over o.Jobs workers; results
// do not depend on the worker count), computes contrasts and q values per
// run, and combines runs within each subject by fixed effects.
func FitStudy(plans []*RunPlan, o Options) (*StudyResult, error) {
	return FitStudyContext(context.Background(), plans, o)
}

// FitStudyContext is FitStudy that stops between runs when ctx is done and
// returns an *Interrupted error.
func FitStudyContext(ctx context.Context, plans []*RunPlan, o Options) (*StudyResult, error) {
	cs := o.Contrasts
	if len(cs) == 0 {
		cs = DefaultContrasts(plans)
	}
	fts := append([]FTest(nil), o.FTests...)
	if len(o.Derivatives) > 0 || o.HRF == HRFFIR {
		for _, c := range Conditions(plans) {
			fts = append(fts, FTest{Name: c})
		}
	}
	res := &StudyResult{Options: o, Contrasts: cs, FTests: fts, Runs: make([]*RunResult, len(plans))}
	jobs := o.Jobs
	if jobs < 1 {
		jobs = runtime.NumCPU()
	}
	errs := make([]error, len(plans))
	var done atomic.Int64
	var progressMu sync.Mutex
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < jobs; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				if ctx.Err() != nil {
					continue
				}
				res.Runs[i], errs[i] = fitPlannedSafe(plans[i], cs, fts, o.Noise)
				if errs[i] == nil {
					n := done.Add(1)
					if o.Progress != nil {
						progressMu.Lock()
						o.Progress(int(n), len(plans))
						progressMu.Unlock()
					}
				}
			}
		}()
	}
	for i := range plans {
		next <- i
	}
	close(next)
	wg.Wait()
	if ctx.Err() != nil {
		return nil, &Interrupted{Done: int(done.Load()), Total: len(plans)}
	}
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	for _, p := range plans {
		res.Warnings = append(res.Warnings, p.Run.Warnings...)
		res.Warnings = append(res.Warnings, p.Warnings...)
	}
	for _, r := range res.Runs {
		res.Warnings = append(res.Warnings, r.Warnings...)
	}
	res.Subjects = combineSubjects(res.Runs, cs)
	return res, nil
}

// fitPlannedSafe is fitPlanned with a last line of defence: a panic (a
// bug, never an expected outcome) becomes an error that names the run and
// asks for a report, so the command still exits with a message and writes
// no partial tables instead of printing a stack trace.
func fitPlannedSafe(p *RunPlan, cs []Contrast, fts []FTest, noise NoiseModel) (rr *RunResult, err error) {
	defer func() {
		if r := recover(); r != nil {
			rr, err = nil, fmt.Errorf("run %s: internal error while fitting (%v); this is a bug in tessera: please report it with the run's files", p.Run.Spec.Key(), r)
		}
	}()
	return fitPlanned(p, cs, fts, noise)
}

// fitPlanned fits one planned run and computes its contrasts and F tests
// with their q values across the run's regions.
func fitPlanned(p *RunPlan, cs []Contrast, fts []FTest, noise NoiseModel) (*RunResult, error) {
	rr := &RunResult{Plan: p}
	if p.Skipped() {
		return rr, nil
	}
	y, err := p.Signals()
	if err != nil {
		return nil, err
	}
	f, err := FitRun(p.Design, p.Regions, y, noise.ForTR(p.TR))
	if err != nil {
		return nil, fmt.Errorf("run %s: %v", p.Run.Spec.Key(), err)
	}
	f.Condition = p.Condition
	rr.Fit = f
	var skipped []string
	for _, reg := range f.Regions {
		if reg.Skip != "" {
			skipped = append(skipped, fmt.Sprintf("%q (%s)", reg.Region, reg.Skip))
		}
	}
	if len(skipped) > 0 {
		rr.Warnings = append(rr.Warnings, fmt.Sprintf("run %s: regions not fitted: %s", p.Run.Spec.Key(), strings.Join(skipped, ", ")))
	}
	var shrunk []string
	for _, reg := range f.Regions {
		if reg.ARShrunk {
			shrunk = append(shrunk, reg.Region)
		}
	}
	var noPSC []string
	for _, reg := range f.Regions {
		if reg.Skip == "" && !reg.HasPSC() {
			noPSC = append(noPSC, fmt.Sprintf("%q", reg.Region))
		}
	}
	if len(noPSC) > 0 {
		rr.Warnings = append(rr.Warnings, fmt.Sprintf("run %s: percent signal change is undefined for %d region(s) (%s) and left empty: their mean signal is not positive or is below the noise level, so the signals are not in raw units (demeaned or z-scored?); give raw signals, or use `group --measure estimate`", p.Run.Spec.Key(), len(noPSC), strings.Join(noPSC, ", ")))
	}
	if len(shrunk) > 0 {
		rr.Warnings = append(rr.Warnings, fmt.Sprintf("run %s: the noise model of %d region(s) was at the edge of stationarity and was held inside it (%s); their residual autocorrelation is strong: check drift and motion terms", p.Run.Spec.Key(), len(shrunk), strings.Join(shrunk, ", ")))
	}
	rr.Contrasts = make([][]ContrastFit, len(cs))
	rr.Valid = make([]bool, len(cs))
	rr.Q = make([][]float64, len(cs))
	for ci, c := range cs {
		vec, ok := c.Vector(p.Design)
		if !ok {
			rr.Warnings = append(rr.Warnings, fmt.Sprintf("run %s: contrast %q is not estimated because the run has no events of one of %s", p.Run.Spec.Key(), c.Name, strings.Join(c.Names, ", ")))
			continue
		}
		rr.Valid[ci] = true
		rr.Contrasts[ci] = make([]ContrastFit, len(f.Regions))
		pv := make([]float64, len(f.Regions))
		for ri := range f.Regions {
			pv[ri] = math.NaN()
			if f.Regions[ri].Skip == "" {
				rr.Contrasts[ci][ri] = f.Regions[ri].Contrast(vec)
				pv[ri] = rr.Contrasts[ci][ri].PValue
			}
		}
		rr.Q[ci] = BenjaminiHochberg(pv)
	}
	rr.FTests = make([][]FTestFit, len(fts))
	rr.FValid = make([]bool, len(fts))
	rr.FQ = make([][]float64, len(fts))
	for fi, ft := range fts {
		var c [][]float64
		var ok bool
		if len(ft.Rows) == 0 {
			c, ok = ConditionFTest(p.Design, ft.Name)
		} else {
			c, ok = ft.Matrix(p.Design)
		}
		if !ok {
			rr.Warnings = append(rr.Warnings, fmt.Sprintf("run %s: F test %q is not computed because the run lacks one of its terms", p.Run.Spec.Key(), ft.Name))
			continue
		}
		rr.FValid[fi] = true
		rr.FTests[fi] = make([]FTestFit, len(f.Regions))
		pv := make([]float64, len(f.Regions))
		for ri := range f.Regions {
			pv[ri] = math.NaN()
			if f.Regions[ri].Skip != "" {
				continue
			}
			r, err := f.Regions[ri].FTest(c)
			if err != nil {
				return nil, fmt.Errorf("run %s: F test %q: %v", p.Run.Spec.Key(), ft.Name, err)
			}
			rr.FTests[fi][ri] = r
			pv[ri] = r.PValue
		}
		rr.FQ[fi] = BenjaminiHochberg(pv)
	}
	if p.reload != nil {
		for i := range f.Regions {
			f.Regions[i].dropCovariance()
		}
	}
	return rr, nil
}

// combineSubjects makes the subject-level rows: per subject (in order of
// first appearance), contrast (in the order given) and region (in the order
// of the subject's first run), the fixed-effects combination of the runs
// where the contrast was estimated, then BH q across regions.
func combineSubjects(runs []*RunResult, cs []Contrast) []SubjectResult {
	var subjects []string
	seenSubject := map[string]bool{}
	bySubject := map[string][]*RunResult{}
	for _, r := range runs {
		s := r.Plan.Run.Spec.Subject
		if !seenSubject[s] {
			// (Not bySubject: it holds only fitted runs, so a subject whose
			// first run was skipped would be listed again at its second.)
			seenSubject[s] = true
			subjects = append(subjects, s)
		}
		if r.Fit != nil {
			bySubject[s] = append(bySubject[s], r)
		}
	}
	var out []SubjectResult
	for _, s := range subjects {
		rs := bySubject[s]
		if len(rs) == 0 {
			continue
		}
		var regions []string
		seen := map[string]bool{}
		index := make([]map[string]int, len(rs))
		for i, r := range rs {
			index[i] = make(map[string]int, len(r.Fit.Regions))
			for ri, reg := range r.Fit.Regions {
				index[i][reg.Region] = ri
				if !seen[reg.Region] {
					seen[reg.Region] = true
					regions = append(regions, reg.Region)
				}
			}
		}
		for ci, c := range cs {
			start := len(out)
			var pv []float64
			for _, region := range regions {
				var est, se, psc []float64
				df := 0
				for i, r := range rs {
					ri, ok := index[i][region]
					if !ok || !r.Valid[ci] || r.Fit.Regions[ri].Skip != "" {
						continue
					}
					cf := r.Contrasts[ci][ri]
					est = append(est, cf.Estimate)
					se = append(se, cf.StdError)
					psc = append(psc, cf.PSC)
					df += cf.DF
				}
				if len(est) == 0 {
					continue
				}
				m, sem, w := FixedEffect(est, se)
				pm, sw := 0.0, 0.0
				for i := range w {
					pm += w[i] * psc[i]
					sw += w[i]
				}
				t := m / sem
				row := SubjectResult{Subject: s, Region: region, Contrast: c.Name, Runs: len(est),
					ContrastFit: ContrastFit{Estimate: m, StdError: sem, Statistic: t, DF: df,
						PValue: TwoSidedP(t, float64(df)), PSC: pm / sw}}
				out = append(out, row)
				pv = append(pv, row.PValue)
			}
			q := BenjaminiHochberg(pv)
			for i := range q {
				out[start+i].Q = q[i]
			}
		}
	}
	return out
}

func columnIndex(names []string, name string) int {
	for i, n := range names {
		if n == name {
			return i
		}
	}
	return -1
}

// missingVolumes marks the volumes where any region's value is NaN or
// infinite; nil when there are none.
func missingVolumes(y [][]float64) []bool {
	var m []bool
	for _, col := range y {
		for t, v := range col {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				if m == nil {
					m = make([]bool, len(col))
				}
				m[t] = true
			}
		}
	}
	return m
}

// fillMissing returns copies of the columns with every marked volume set to
// the column's mean over the unmarked ones. The value does not matter to the
// estimates: the volume's censor term absorbs it (an indicator for one
// observation removes it from a least-squares or GLS fit exactly).
func fillMissing(y [][]float64, marked []bool) [][]float64 {
	out := make([][]float64, len(y))
	for i, col := range y {
		c := append([]float64(nil), col...)
		out[i] = c
		sum, n := 0.0, 0
		for t, v := range col {
			if !marked[t] {
				sum += v
				n++
			}
		}
		mean := 0.0
		if n > 0 {
			mean = sum / float64(n)
		}
		for t := range c {
			if marked[t] {
				c[t] = mean
			}
		}
	}
	return out
}

// foreignConditionWarnings warns about a run with events whose conditions
// appear in no other run of the study, the mark of an events table that
// belongs to another study or task.
func foreignConditionWarnings(plans []*RunPlan) {
	if len(plans) < 2 {
		return
	}
	count := map[string]int{}
	for _, p := range plans {
		for _, c := range p.Design.Conditions {
			count[c]++
		}
	}
	for _, p := range plans {
		conds := p.Design.Conditions
		if len(conds) == 0 {
			continue
		}
		shared := false
		for _, c := range conds {
			if count[c] > 1 {
				shared = true
			}
		}
		if !shared {
			var others []string
			for c, n := range count {
				if n > 0 && !slices.Contains(conds, c) {
					others = append(others, c)
				}
			}
			sort.Strings(others)
			p.Warnings = append(p.Warnings, fmt.Sprintf("run %s: none of its conditions (%s) appear in any other run (which have %s): check that its events table belongs to it", p.Run.Spec.Key(), strings.Join(conds, ", "), strings.Join(others, ", ")))
		}
	}
}

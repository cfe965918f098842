package fit

import (
	"fmt"
	"math"
	"runtime"
	"sort"
	"strings"
	"sync"

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
	// Motion names the six rigid-body columns; nil takes tx,ty,tz,rx,ry,rz
	// where all six exist in a run's confounds table.
	Motion    []string
	Confounds []string
	Jobs      int
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
	if err := checkContrasts(plans, o.Contrasts); err != nil {
		return nil, err
	}
	return plans, nil
}

func planRun(r *roi.Run, o Options) (*RunPlan, error) {
	tr := r.Spec.TR
	if o.TR > 0 {
		tr = o.TR
	}
	n := r.Signals.Rows()
	spec := DesignSpec{Volumes: n, TR: tr, SliceRef: o.SliceRef, Highpass: o.Highpass, HRF: o.HRF}
	p := &RunPlan{Run: r, TR: tr, Events: map[string]int{}}
	if r.Events != nil {
		spec.Events = r.Events.Events
		for _, e := range spec.Events {
			p.Events[e.Condition]++
		}
	}
	where := r.Spec.Confounds
	pick := func(names []string, required bool) ([]Column, error) {
		var cols []Column
		for _, name := range names {
			var v []float64
			if r.Confounds != nil {
				v = r.Confounds.Column(name)
			}
			if v == nil {
				if r.Confounds == nil {
					return nil, fmt.Errorf("run %s: column %q was asked for but the run has no confounds table", r.Spec.Key(), name)
				}
				return nil, fmt.Errorf("%s: no column %q; the header has %s", where, name, strings.Join(r.Confounds.Names, ", "))
			}
			for t, x := range v {
				if math.IsNaN(x) {
					return nil, fmt.Errorf("%s:%d: column %q is missing a value at volume %d; expected a number in every row of a column the model uses", where, t+2, name, t)
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
	if spec.Motion, err = pick(motion, true); err != nil {
		return nil, err
	}
	if spec.Confound, err = pick(o.Confounds, true); err != nil {
		return nil, err
	}
	d, err := BuildDesign(spec)
	if err != nil {
		return nil, fmt.Errorf("run %s: %v", r.Spec.Key(), err)
	}
	p.Design = d
	rows, k := d.X.Dims()
	if rows <= k {
		p.Warnings = append(p.Warnings, fmt.Sprintf("run %s has %d volumes for %d terms and is skipped", r.Spec.Key(), rows, k))
		p.Condition = math.Inf(1)
		return p, nil
	}
	cond, err := CheckDesign(r.Spec.Key(), d)
	if err != nil {
		return nil, err
	}
	p.Condition = cond
	return p, nil
}

// Skipped reports whether the run has too few volumes to fit.
func (p *RunPlan) Skipped() bool { r, k := p.Design.X.Dims(); return r <= k }

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

func checkContrasts(plans []*RunPlan, cs []Contrast) error {
	known := Conditions(plans)
	seen := map[string]bool{}
	for _, c := range cs {
		if seen[c.Name] {
			return fmt.Errorf("two contrasts are named %q; give each its own name", c.Name)
		}
		seen[c.Name] = true
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
	Q        [][]float64
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
	Warnings  []string
}

// FitStudy fits every planned run (in parallel over o.Jobs workers; results
// do not depend on the worker count), computes contrasts and q values per
// run, and combines runs within each subject by fixed effects.
func FitStudy(plans []*RunPlan, o Options) (*StudyResult, error) {
	cs := o.Contrasts
	if len(cs) == 0 {
		cs = DefaultContrasts(plans)
	}
	res := &StudyResult{Options: o, Contrasts: cs, Runs: make([]*RunResult, len(plans))}
	jobs := o.Jobs
	if jobs < 1 {
		jobs = runtime.NumCPU()
	}
	errs := make([]error, len(plans))
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < jobs; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				res.Runs[i], errs[i] = fitPlanned(plans[i], cs, o.Noise)
			}
		}()
	}
	for i := range plans {
		next <- i
	}
	close(next)
	wg.Wait()
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

func fitPlanned(p *RunPlan, cs []Contrast, noise NoiseModel) (*RunResult, error) {
	rr := &RunResult{Plan: p}
	if p.Skipped() {
		return rr, nil
	}
	sig := p.Run.Signals
	f, err := FitRun(p.Design, sig.Names, sig.Cols, noise)
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
	return rr, nil
}

// combineSubjects makes the subject-level rows: per subject (in order of
// first appearance), contrast (in the order given) and region (in the order
// of the subject's first run), the fixed-effects combination of the runs
// where the contrast was estimated, then BH q across regions.
func combineSubjects(runs []*RunResult, cs []Contrast) []SubjectResult {
	var subjects []string
	bySubject := map[string][]*RunResult{}
	for _, r := range runs {
		s := r.Plan.Run.Spec.Subject
		if _, ok := bySubject[s]; !ok {
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

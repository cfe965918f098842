package report

import (
	"github.com/tessera-fmri/tessera/fit"
)

// Tables added with the design features, columns in contract order.
var (
	Motion = TableDef{"motion.csv", "subject, session, run, volume (written when runs have motion columns)", []ColumnDef{
		colSubject, colSession, colRun,
		{"volume", "volume, counted from 0 among the kept volumes (after --skip-volumes)", ""},
		{"fd", "framewise displacement (Power et al. 2012): sum of absolute backward differences of the six motion parameters, rotations as arc length on a 50 mm sphere; 0 for the first volume", "mm"},
		{"censored", "1 when the volume is censored (--censor-fd), else 0", ""},
	}}
	AuditTable = TableDef{"audit.csv", "subject, session, run, item, measure", []ColumnDef{
		colSubject, colSession, colRun,
		{"item", "what is measured: a term, a contrast, `A vs B` (a pair of conditions), `design` or `run`", ""},
		{"measure", "vif (variance inflation factor of a condition term), max_correlation (largest correlation between two conditions' main terms), condition_number (of the unit-scaled design), efficiency (1 / c'(X'X)^-1 c of a contrast), relative_efficiency (efficiency / the best run's), censored_share (share of volumes censored)", ""},
		{"value", "the measure's value", ""},
		{"flag", "empty, or `high` when the value is beyond its threshold (--vif-max, --correlation-max, --censor-max-share)", ""},
	}}
	FTests = TableDef{"ftests.csv", "subject, session, run, region, test (written when there are F tests)", []ColumnDef{
		colSubject, colSession, colRun, colRegion,
		{"test", "F test name (--ftest NAME = ...; or a condition, testing all its terms, in models with derivatives or FIR bins)", ""},
		{"statistic", "F = (Cβ)'(C Cov(β) C')^-1 (Cβ) / q", ""},
		{"df_num", "q, the number of rows tested", ""},
		{"df_den", "residual degrees of freedom", ""},
		{"p_value", "upper tail of the F distribution", ""},
		{"q_value", "Benjamini-Hochberg adjusted p across the regions of this run and test", ""},
	}}
	Responses = TableDef{"responses.csv", "subject, session, run, region, condition, time (written with --hrf fir)", []ColumnDef{
		colSubject, colSession, colRun, colRegion,
		{"condition", "condition name", ""},
		{"time", "centre of the FIR bin, after onset", "seconds"},
		{"estimate", "the bin's estimate: the response at that time after onset", "signal units"},
		{"std_error", "standard error of the estimate", "signal units"},
		{"psc", "100 * estimate / baseline", "percent of baseline"},
	}}
)

// WriteDesignTables writes audit.csv, and motion.csv, ftests.csv and
// responses.csv where they apply, concurrently (they are separate files);
// the first error in that order is returned.
func WriteDesignTables(out *Output, res *fit.StudyResult) error {
	hasMotion, hasFIR := false, res.Options.HRF == fit.HRFFIR
	for _, rr := range res.Runs {
		if rr.Plan.FD != nil {
			hasMotion = true
		}
	}
	jobs := []func() error{func() error { return writeAuditTable(out, res) }}
	if hasMotion {
		jobs = append(jobs, func() error { return writeMotion(out, res) })
	}
	if len(res.FTests) > 0 {
		jobs = append(jobs, func() error { return writeFTestTable(out, res) })
	}
	if hasFIR {
		jobs = append(jobs, func() error { return writeResponses(out, res) })
	}
	return parallel(jobs...)
}

// writeAuditTable writes audit.csv: the design audit of every run.
func writeAuditTable(out *Output, res *fit.StudyResult) error {
	aud, err := newTable(out, AuditTable)
	if err != nil {
		return err
	}
	for _, rr := range res.Runs {
		s := rr.Plan.Run.Spec
		for _, a := range rr.Plan.Audit {
			aud.str(s.Subject)
			aud.str(s.Session)
			aud.str(s.Run)
			aud.str(a.Item)
			aud.str(a.Measure)
			aud.num(a.Value)
			aud.str(a.Flag)
			aud.end()
		}
	}
	return aud.close()
}

// writeMotion writes motion.csv: framewise displacement and censoring of
// every kept volume of the runs with motion columns.
func writeMotion(out *Output, res *fit.StudyResult) error {
	mt, err := newTable(out, Motion)
	if err != nil {
		return err
	}
	var key cellRun
	for _, rr := range res.Runs {
		s := rr.Plan.Run.Spec
		cens := rr.Plan.Design.Censored
		key.set(s.Subject, s.Session, s.Run)
		for v, fd := range rr.Plan.FD {
			mt.cells(&key)
			mt.integer(v)
			mt.num(fd)
			if cens != nil && cens[v] {
				mt.integer(1)
			} else {
				mt.integer(0)
			}
			mt.end()
		}
	}
	return mt.close()
}

// writeFTestTable writes ftests.csv: one row per valid F test and fitted
// region of each run, tests outermost.
func writeFTestTable(out *Output, res *fit.StudyResult) error {
	ft, err := newTable(out, FTests)
	if err != nil {
		return err
	}
	var key cellRun
	for _, rr := range res.Runs {
		if rr.Fit == nil {
			continue
		}
		s := rr.Plan.Run.Spec
		for fi, t := range res.FTests {
			if !rr.FValid[fi] {
				continue
			}
			for ri := range rr.Fit.Regions {
				reg := &rr.Fit.Regions[ri]
				if reg.Skip != "" {
					continue
				}
				f := rr.FTests[fi][ri]
				key.set(s.Subject, s.Session, s.Run, reg.Region, t.Name)
				ft.cells(&key)
				ft.num(f.Statistic)
				ft.integer(f.DFNum)
				ft.integer(f.DFDen)
				ft.num(f.PValue)
				ft.num(rr.FQ[fi][ri])
				ft.end()
			}
		}
	}
	return ft.close()
}

// writeResponses writes responses.csv: the FIR bins of every fitted region.
func writeResponses(out *Output, res *fit.StudyResult) error {
	rt, err := newTable(out, Responses)
	if err != nil {
		return err
	}
	var key cellRun
	for _, rr := range res.Runs {
		if rr.Fit == nil {
			continue
		}
		s := rr.Plan.Run.Spec
		d := rr.Plan.Design
		for ri := range rr.Fit.Regions {
			reg := &rr.Fit.Regions[ri]
			if reg.Skip != "" {
				continue
			}
			key.set(s.Subject, s.Session, s.Run, reg.Region)
			for j, t := range d.Terms {
				if t.Kind != fit.TermFIR {
					continue
				}
				rt.cells(&key)
				rt.str(t.Condition)
				rt.num(t.Time)
				rt.num(reg.Beta[j])
				rt.num(reg.StdError[j])
				rt.num(reg.PSC(reg.Beta[j]))
				rt.end()
			}
		}
	}
	return rt.close()
}

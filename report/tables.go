package report

import (
	"strconv"
	"sync"

	"github.com/tessera-fmri/tessera/fit"
)

// Num formats a number in the shortest form that round-trips a float64;
// NaN and infinities are written as an empty (missing) cell. The table
// writers use its append form, AppendNum, which gives the same bytes.
func Num(v float64) string {
	var b [32]byte
	return string(AppendNum(b[:0], v))
}

// WriteTables writes estimates, contrasts, subject_contrasts, diagnostics,
// autocorrelation and the design tables of a study fit. Rows follow the
// study table's run order, the signals table's region order, the design's
// term order and the contrasts' order. The tables are separate files, so
// they are written concurrently, each by one goroutine in its row order;
// the first error in the order of the list above is returned.
func WriteTables(out *Output, res *fit.StudyResult) error {
	return parallel(
		func() error { return writeEstimates(out, res) },
		func() error { return writeContrasts(out, res) },
		func() error { return writeDiagnostics(out, res) },
		func() error { return writeDesigns(out, res) },
		func() error { return writeSubjectContrasts(out, res) },
		func() error { return writeAutocorrelation(out, res) },
		func() error { return WriteDesignTables(out, res) },
	)
}

// parallel runs the jobs concurrently, waits for all of them and returns
// the first error in job order, so the error reported does not depend on
// which job failed first in time.
func parallel(jobs ...func() error) error {
	errs := make([]error, len(jobs))
	var wg sync.WaitGroup
	for i, job := range jobs {
		wg.Go(func() { errs[i] = job() })
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// writeEstimates writes estimates.csv: one row per fitted region and term,
// formatted in parts of partRegions regions (see writeParts).
func writeEstimates(out *Output, res *fit.StudyResult) error {
	return writeParts(out, Estimates, regionParts(res, estimateRows))
}

// regionParts splits the fitted runs of res into parts of partRegions
// regions, in run and region order, each formatted by rows (see
// writeParts).
func regionParts(res *fit.StudyResult, rows func(t *tableWriter, rr *fit.RunResult, regions []fit.RegionFit)) []func(*tableWriter) {
	var parts []func(*tableWriter)
	for _, rr := range res.Runs {
		if rr.Fit == nil {
			continue
		}
		for lo := 0; lo < len(rr.Fit.Regions); lo += partRegions {
			regions := rr.Fit.Regions[lo:min(lo+partRegions, len(rr.Fit.Regions))]
			parts = append(parts, func(t *tableWriter) { rows(t, rr, regions) })
		}
	}
	return parts
}

// estimateRows appends the estimates rows of the given regions of run rr.
func estimateRows(est *tableWriter, rr *fit.RunResult, regions []fit.RegionFit) {
	s := rr.Plan.Run.Spec
	d := rr.Plan.Design
	var key cellRun
	terms := termCells(nil, d)
	for ri := range regions {
		reg := &regions[ri]
		if reg.Skip != "" {
			continue
		}
		key.set(s.Subject, s.Session, s.Run, reg.Region)
		df := float64(reg.DF)
		for j, term := range d.Terms {
			t := reg.Beta[j] / reg.StdError[j]
			est.cells(&key)
			est.cells(&terms[j])
			est.num(reg.Beta[j])
			est.num(reg.StdError[j])
			est.num(t)
			est.integer(reg.DF)
			est.num(fit.TwoSidedP(t, df))
			if term.Kind == fit.TermCondition || term.Kind == fit.TermFIR {
				est.num(reg.PSC(reg.Beta[j]))
			} else {
				est.str("")
			}
			est.end()
		}
	}
}

// termCells encodes the term names of d, reusing the cells of buf.
func termCells(buf []cellRun, d *fit.Design) []cellRun {
	for len(buf) < len(d.Terms) {
		buf = append(buf, cellRun{})
	}
	buf = buf[:len(d.Terms)]
	for j, t := range d.Terms {
		buf[j].set(t.Name)
	}
	return buf
}

// writeContrasts writes contrasts.csv: one row per valid contrast and
// fitted region of each run, contrasts outermost.
func writeContrasts(out *Output, res *fit.StudyResult) error {
	con, err := newTable(out, Contrasts)
	if err != nil {
		return err
	}
	var key, name cellRun
	for _, rr := range res.Runs {
		if rr.Fit == nil {
			continue
		}
		s := rr.Plan.Run.Spec
		for ci, c := range res.Contrasts {
			if !rr.Valid[ci] {
				continue
			}
			name.set(c.Name)
			for ri := range rr.Fit.Regions {
				reg := &rr.Fit.Regions[ri]
				if reg.Skip != "" {
					continue
				}
				cf := rr.Contrasts[ci][ri]
				key.set(s.Subject, s.Session, s.Run, reg.Region)
				con.cells(&key)
				con.cells(&name)
				con.num(cf.Estimate)
				con.num(cf.StdError)
				con.num(cf.Statistic)
				con.integer(cf.DF)
				con.num(cf.PValue)
				con.num(rr.Q[ci][ri])
				con.num(cf.PSC)
				con.end()
			}
		}
	}
	return con.close()
}

// writeDiagnostics writes diagnostics.csv: one row per region of each run,
// skipped regions and runs included.
func writeDiagnostics(out *Output, res *fit.StudyResult) error {
	diag, err := newTable(out, Diagnostics)
	if err != nil {
		return err
	}
	var key cellRun
	for _, rr := range res.Runs {
		s := rr.Plan.Run.Spec
		d := rr.Plan.Design
		n := rr.Plan.Volumes
		if rr.Fit == nil {
			for _, name := range rr.Plan.Regions {
				diag.row(s.Subject, s.Session, s.Run, name, strconv.Itoa(n), "0", "", "", "", "skipped:"+rr.Plan.Skip, "", "", "", "", "", "", "", "", "", "")
			}
			continue
		}
		censored := d.CensoredCount()
		for ri := range rr.Fit.Regions {
			reg := &rr.Fit.Regions[ri]
			if reg.Skip != "" {
				diag.row(s.Subject, s.Session, s.Run, reg.Region, strconv.Itoa(n), strconv.Itoa(censored), "", "", "", "skipped:"+reg.Skip, "", "", "", "", "", "", "", "", "", "")
				continue
			}
			key.set(s.Subject, s.Session, s.Run, reg.Region)
			diag.cells(&key)
			diag.integer(n)
			diag.integer(censored)
			diag.integer(reg.DF)
			diag.num(reg.Sigma)
			diag.num(reg.RSquared)
			diag.str(reg.NoiseName)
			diag.integer(len(reg.AR))
			diag.nums(reg.AR)
			diag.num(reg.DurbinWatson)
			diag.num(reg.LjungBoxP)
			diag.num(reg.NormalityP)
			diag.num(reg.Baseline / reg.Sigma)
			diag.nums(reg.MA)
			diag.num(reg.WhiteShare)
			diag.str(reg.NoiseScope)
			diag.integer(reg.NoisePasses)
			diag.end()
		}
	}
	return diag.close()
}

// writeSubjectContrasts writes subject_contrasts.csv, in the order of
// res.Subjects.
func writeSubjectContrasts(out *Output, res *fit.StudyResult) error {
	sub, err := newTable(out, SubjectContrasts)
	if err != nil {
		return err
	}
	for _, r := range res.Subjects {
		sub.str(r.Subject)
		sub.str(r.Region)
		sub.str(r.Contrast)
		sub.integer(r.Runs)
		sub.num(r.Estimate)
		sub.num(r.StdError)
		sub.num(r.Statistic)
		sub.integer(r.DF)
		sub.num(r.PValue)
		sub.num(r.Q)
		sub.num(r.PSC)
		sub.end()
	}
	return sub.close()
}

// writeDesigns writes the design matrix of every run, design/KEY.csv, all
// through one buffer.
func writeDesigns(out *Output, res *fit.StudyResult) error {
	w := newTableWriter(nil, 0)
	for _, rr := range res.Runs {
		if err := writeDesign(out, rr.Plan.Run.Spec.Key(), rr.Plan.Design, w); err != nil {
			return err
		}
	}
	return nil
}

// writeDesign writes design/KEY.csv through w (its buffer reused): the
// term names, then one row per volume of the design matrix.
func writeDesign(out *Output, key string, d *fit.Design, w *tableWriter) error {
	f, err := out.Create("design/" + key + ".csv")
	if err != nil {
		return err
	}
	w.w, w.buf, w.n, w.err = f, w.buf[:0], 0, nil
	for _, t := range d.Terms {
		w.str(t.Name)
	}
	w.end()
	n, k := d.X.Dims()
	for i := 0; i < n; i++ {
		for j := 0; j < k; j++ {
			w.num(d.X.At(i, j))
		}
		w.end()
	}
	return w.close()
}

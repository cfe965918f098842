package report

import (
	"encoding/csv"
	"math"
	"strconv"
	"strings"

	"github.com/tessera-fmri/tessera/fit"
)

// Num formats a number in the shortest form that round-trips a float64;
// NaN and infinities are written as an empty (missing) cell.
func Num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

type tableWriter struct {
	w    *csv.Writer
	cols int
}

func newTable(out *Output, def TableDef) (*tableWriter, error) {
	f, err := out.Create(def.File)
	if err != nil {
		return nil, err
	}
	tw := &tableWriter{w: csv.NewWriter(f), cols: len(def.Columns)}
	tw.w.Write(def.Header())
	return tw, nil
}

func (t *tableWriter) row(cells ...string) {
	if len(cells) != t.cols {
		panic("report: row does not match its table definition")
	}
	t.w.Write(cells)
}

func (t *tableWriter) close() error {
	t.w.Flush()
	return t.w.Error()
}

// WriteTables writes estimates, contrasts, subject_contrasts, diagnostics
// and the design tables of a study fit. Rows follow the study table's run
// order, the signals table's region order, the design's term order and the
// contrasts' order.
func WriteTables(out *Output, res *fit.StudyResult) error {
	est, err := newTable(out, Estimates)
	if err != nil {
		return err
	}
	con, err := newTable(out, Contrasts)
	if err != nil {
		return err
	}
	diag, err := newTable(out, Diagnostics)
	if err != nil {
		return err
	}
	for _, rr := range res.Runs {
		s := rr.Plan.Run.Spec
		d := rr.Plan.Design
		if err := writeDesign(out, s.Key(), d); err != nil {
			return err
		}
		n := rr.Plan.Volumes
		if rr.Fit == nil {
			for _, name := range rr.Plan.Regions {
				diag.row(s.Subject, s.Session, s.Run, name, strconv.Itoa(n), "0", "", "", "", "skipped:too few volumes", "", "", "", "", "", "", "", "", "", "")
			}
			continue
		}
		for _, reg := range rr.Fit.Regions {
			if reg.Skip != "" {
				diag.row(s.Subject, s.Session, s.Run, reg.Region, strconv.Itoa(n), strconv.Itoa(d.CensoredCount()), "", "", "", "skipped:"+reg.Skip, "", "", "", "", "", "", "", "", "", "")
				continue
			}
			for j, term := range d.Terms {
				psc := ""
				if term.Kind == fit.TermCondition || term.Kind == fit.TermFIR {
					psc = Num(100 * reg.Beta[j] / reg.Baseline)
				}
				t := reg.Beta[j] / reg.StdError[j]
				est.row(s.Subject, s.Session, s.Run, reg.Region, term.Name,
					Num(reg.Beta[j]), Num(reg.StdError[j]), Num(t), strconv.Itoa(reg.DF),
					Num(fit.TwoSidedP(t, float64(reg.DF))), psc)
			}
			coefs := make([]string, len(reg.AR))
			for i, a := range reg.AR {
				coefs[i] = Num(a)
			}
			ma := make([]string, len(reg.MA))
			for i, v := range reg.MA {
				ma[i] = Num(v)
			}
			diag.row(s.Subject, s.Session, s.Run, reg.Region, strconv.Itoa(n), strconv.Itoa(d.CensoredCount()), strconv.Itoa(reg.DF),
				Num(reg.Sigma), Num(reg.RSquared), reg.NoiseName, strconv.Itoa(len(reg.AR)),
				strings.Join(coefs, " "), Num(reg.DurbinWatson), Num(reg.LjungBoxP), Num(reg.NormalityP),
				Num(reg.Baseline/reg.Sigma), strings.Join(ma, " "), Num(reg.WhiteShare), reg.NoiseScope, strconv.Itoa(reg.NoisePasses))
		}
		for ci, c := range res.Contrasts {
			if !rr.Valid[ci] {
				continue
			}
			for ri, reg := range rr.Fit.Regions {
				if reg.Skip != "" {
					continue
				}
				cf := rr.Contrasts[ci][ri]
				con.row(s.Subject, s.Session, s.Run, reg.Region, c.Name, Num(cf.Estimate), Num(cf.StdError),
					Num(cf.Statistic), strconv.Itoa(cf.DF), Num(cf.PValue), Num(rr.Q[ci][ri]), Num(cf.PSC))
			}
		}
	}
	sub, err := newTable(out, SubjectContrasts)
	if err != nil {
		return err
	}
	for _, r := range res.Subjects {
		sub.row(r.Subject, r.Region, r.Contrast, strconv.Itoa(r.Runs), Num(r.Estimate), Num(r.StdError),
			Num(r.Statistic), strconv.Itoa(r.DF), Num(r.PValue), Num(r.Q), Num(r.PSC))
	}
	for _, t := range []*tableWriter{est, con, diag, sub} {
		if err := t.close(); err != nil {
			return err
		}
	}
	if err := writeAutocorrelation(out, res); err != nil {
		return err
	}
	return WriteDesignTables(out, res)
}

func writeDesign(out *Output, key string, d *fit.Design) error {
	f, err := out.Create("design/" + key + ".csv")
	if err != nil {
		return err
	}
	w := csv.NewWriter(f)
	names := make([]string, len(d.Terms))
	for i, t := range d.Terms {
		names[i] = t.Name
	}
	w.Write(names)
	n, k := d.X.Dims()
	row := make([]string, k)
	for i := 0; i < n; i++ {
		for j := 0; j < k; j++ {
			row[j] = Num(d.X.At(i, j))
		}
		w.Write(row)
	}
	w.Flush()
	return w.Error()
}

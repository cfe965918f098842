package fit

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/tessera-fmri/tessera/roi"
)

// AuditThresholds are the limits above which the design audit flags a
// value. The defaults (VIF 5, |r| 0.8) are common practice; a third of the
// volumes censored is a judgement: beyond it a run has lost much of its
// information and its noise estimate rests on the rest.
type AuditThresholds struct {
	VIF           float64
	Correlation   float64
	CensoredShare float64
	MinEvents     int
}

// DefaultAuditThresholds are the defaults of --vif-max, --correlation-max,
// --censor-max-share and --min-events.
var DefaultAuditThresholds = AuditThresholds{VIF: 5, Correlation: 0.8, CensoredShare: 1.0 / 3, MinEvents: 3}

// AuditRow is one value of a run's design audit (a row of audit.csv).
type AuditRow struct {
	Item, Measure string
	Value         float64
	Flag          string // empty, or a short word such as "high"
}

// VIF returns the variance inflation factor of column j of the design,
//
//	VIF_j = 1 / (1 - R²_j) = [(X'X)^-1]_jj · sum_t (x_tj - x̄_j)²,
//
// R²_j from regressing column j on all the others, the intercept included
// (as R's car::vif computes it for one-degree-of-freedom terms from the
// correlation matrix of the predictors; Fox and Monette 1992, JASA
// 87:178-183).
func VIF(l *LSQ, x []float64, j int) float64 {
	mean := 0.0
	for _, v := range x {
		mean += v
	}
	mean /= float64(len(x))
	ss := 0.0
	for _, v := range x {
		ss += (v - mean) * (v - mean)
	}
	return l.CovUnscaled().At(j, j) * ss
}

// Efficiency returns 1 / c'(X'X)^-1 c, the design's efficiency for contrast
// c (Friston et al. 1999, NeuroImage 10:607-619): proportional to the
// inverse variance of the estimate under white noise of unit variance.
func Efficiency(l *LSQ, c []float64) float64 {
	cov := l.CovUnscaled()
	v := 0.0
	for i := range c {
		for j := range c {
			v += c[i] * cov.At(i, j) * c[j]
		}
	}
	return 1 / v
}

func correlation(a, b []float64) float64 {
	n := float64(len(a))
	ma, mb := 0.0, 0.0
	for i := range a {
		ma += a[i]
		mb += b[i]
	}
	ma /= n
	mb /= n
	sab, saa, sbb := 0.0, 0.0, 0.0
	for i := range a {
		da, db := a[i]-ma, b[i]-mb
		sab += da * db
		saa += da * da
		sbb += db * db
	}
	return sab / math.Sqrt(saa*sbb)
}

// Audit computes a run's design audit: VIF of each condition term, the
// largest correlation between two conditions' main terms (and a warning for
// every pair above the threshold), the condition number, the efficiency of
// each contrast and the censored share. Warnings say what the value means.
func Audit(run string, d *Design, cond float64, cs []Contrast, th AuditThresholds) ([]AuditRow, []string) {
	var rows []AuditRow
	var warns []string
	n, k := d.X.Dims()
	rows = append(rows, AuditRow{Item: "design", Measure: "condition_number", Value: cond})
	share := float64(d.CensoredCount()) / float64(n)
	row := AuditRow{Item: "run", Measure: "censored_share", Value: share}
	if share > th.CensoredShare {
		row.Flag = "high"
		warns = append(warns, fmt.Sprintf("run %s: %.0f%% of its volumes are censored (more than %.0f%%): little information is left and the noise estimate rests on the rest; consider leaving the run out", run, 100*share, 100*th.CensoredShare))
	}
	rows = append(rows, row)
	if n <= k {
		return rows, warns
	}
	l, err := NewLSQ(d.X)
	if err != nil {
		return rows, warns
	}
	col := func(j int) []float64 {
		v := make([]float64, n)
		for t := range v {
			v[t] = d.X.At(t, j)
		}
		return v
	}
	var mains []int
	for j, t := range d.Terms {
		if t.Kind > TermFIR {
			continue
		}
		if t.Kind == TermCondition {
			mains = append(mains, j)
		}
		v := VIF(l, col(j), j)
		r := AuditRow{Item: t.Name, Measure: "vif", Value: v}
		if v > th.VIF {
			r.Flag = "high"
			warns = append(warns, fmt.Sprintf("`%s` has a variance inflation factor of %.1f in run %s (above %g): the other terms explain most of it, so its estimate is imprecise", t.Name, v, run, th.VIF))
		}
		rows = append(rows, r)
	}
	type pair struct {
		a, b string
		r    float64
	}
	var pairs []pair
	for i := 0; i < len(mains); i++ {
		for j := i + 1; j < len(mains); j++ {
			pairs = append(pairs, pair{d.Terms[mains[i]].Name, d.Terms[mains[j]].Name, correlation(col(mains[i]), col(mains[j]))})
		}
	}
	if len(pairs) > 0 {
		sort.SliceStable(pairs, func(i, j int) bool { return math.Abs(pairs[i].r) > math.Abs(pairs[j].r) })
		top := pairs[0]
		r := AuditRow{Item: top.a + " vs " + top.b, Measure: "max_correlation", Value: top.r}
		if math.Abs(top.r) > th.Correlation {
			r.Flag = "high"
		}
		rows = append(rows, r)
		for _, p := range pairs {
			if math.Abs(p.r) > th.Correlation {
				what := "their sum is not"
				if p.r < 0 {
					what = "their difference is not"
				}
				warns = append(warns, fmt.Sprintf("`%s` and `%s` correlate at %.2f in run %s: their separate estimates are unstable; %s", p.a, p.b, p.r, run, what))
			}
		}
	}
	for _, c := range cs {
		v, ok := c.Vector(d)
		if !ok {
			continue
		}
		rows = append(rows, AuditRow{Item: c.Name, Measure: "efficiency", Value: Efficiency(l, v)})
	}
	return rows, warns
}

// EventWarnings checks a run's events: overlapping events of one condition,
// conditions with fewer than minEvents events, events that start before the
// first acquired volume, and events that start inside censored volumes.
// Onsets are relative to the first kept volume; skip is the number of
// volumes dropped before it (--skip-volumes): events between the original
// first volume and the first kept one are expected and not reported.
func EventWarnings(run string, evs []roi.Event, tr float64, volumes int, skip int, censored []bool, minEvents int) []string {
	var out []string
	byCond := map[string][]roi.Event{}
	var conds []string
	for _, e := range evs {
		if _, ok := byCond[e.Condition]; !ok {
			conds = append(conds, e.Condition)
		}
		byCond[e.Condition] = append(byCond[e.Condition], e)
	}
	sort.Strings(conds)
	for _, c := range conds {
		es := append([]roi.Event(nil), byCond[c]...)
		sort.SliceStable(es, func(i, j int) bool { return es[i].Onset < es[j].Onset })
		var overl []string
		for i := 1; i < len(es); i++ {
			if es[i].Onset < es[i-1].Onset+es[i-1].Duration {
				overl = append(overl, fmt.Sprintf("%d and %d", es[i-1].Line, es[i].Line))
			}
		}
		if len(overl) > 0 {
			out = append(out, fmt.Sprintf("run %s: events of %q overlap (lines %s): their responses add up; check that the log is not duplicated", run, c, joinMax(overl, 10)))
		}
		if len(es) < minEvents {
			out = append(out, fmt.Sprintf("run %s: condition %q has %d event(s), fewer than %d: its estimate in this run rests on very little", run, c, len(es), minEvents))
		}
	}
	var before, inCensor []string
	for _, e := range evs {
		if e.Onset < -float64(skip)*tr {
			before = append(before, fmt.Sprint(e.Line))
		}
		if censored != nil {
			v := int(math.Floor(e.Onset / tr))
			if v >= 0 && v < volumes && censored[v] {
				inCensor = append(inCensor, fmt.Sprint(e.Line))
			}
		}
	}
	if len(before) > 0 {
		out = append(out, fmt.Sprintf("run %s: events on lines %s start before the first volume; onsets are seconds from the start of the first volume", run, joinMax(before, 10)))
	}
	if len(inCensor) > 0 {
		out = append(out, fmt.Sprintf("run %s: events on lines %s start in censored volumes: the responses to them are estimated from the volumes around them only", run, joinMax(inCensor, 10)))
	}
	return out
}

func joinMax(s []string, n int) string {
	if len(s) <= n {
		return strings.Join(s, ", ")
	}
	return strings.Join(s[:n], ", ") + fmt.Sprintf(" and %d more", len(s)-n)
}

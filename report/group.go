package report

import (
	"strconv"

	"github.com/tessera-fmri/tessera/fit"
)

// WriteGroupTables writes group.csv (every row of res) and power.csv (every
// row with a pilot power, that is the mean and two-group terms), in the
// order of res.Rows: contrasts, regions, then terms.
func WriteGroupTables(out *Output, res *fit.GroupResult) error {
	g, err := newTable(out, GroupResults)
	if err != nil {
		return err
	}
	p, err := newTable(out, PilotPower)
	if err != nil {
		return err
	}
	for _, r := range res.Rows {
		g.str(r.Contrast)
		g.str(r.Region)
		g.str(r.Term)
		g.integer(r.N)
		for _, v := range []float64{r.Estimate, r.StdError, r.Statistic, r.DF, r.PValue, r.Q, r.PHolm,
			r.Effect.D, r.Effect.Low, r.Effect.High, r.Tau2} {
			g.num(v)
		}
		g.end()
		if r.Power != nil {
			p.str(r.Contrast)
			p.str(r.Region)
			p.str(r.Term)
			p.integer(r.N)
			p.num(r.Effect.D)
			p.str(count(r.Power.NFor80))
			p.str(count(r.Power.NFor90))
			p.num(r.Power.Detectable)
			p.end()
		}
	}
	for _, t := range []*tableWriter{g, p} {
		if err := t.close(); err != nil {
			return err
		}
	}
	return nil
}

// count writes a sample size; 0 (none reachable) is an empty cell.
func count(n int) string {
	if n <= 0 {
		return ""
	}
	return strconv.Itoa(n)
}

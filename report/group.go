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
		g.row(r.Contrast, r.Region, r.Term, strconv.Itoa(r.N), Num(r.Estimate), Num(r.StdError), Num(r.Statistic),
			Num(r.DF), Num(r.PValue), Num(r.Q), Num(r.PHolm), Num(r.Effect.D), Num(r.Effect.Low), Num(r.Effect.High),
			Num(r.Tau2))
		if r.Power != nil {
			p.row(r.Contrast, r.Region, r.Term, strconv.Itoa(r.N), Num(r.Effect.D), count(r.Power.NFor80),
				count(r.Power.NFor90), Num(r.Power.Detectable))
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

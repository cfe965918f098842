package report

import (
	"fmt"

	"github.com/tessera-fmri/tessera/fit"
)

// groupFigureLimit caps the group figures at this many (contrast, term)
// pairs, so that a study with many contrasts keeps a readable report.
const groupFigureLimit = 8

// WriteGroupFigures draws, per contrast and term (in the order of the
// results), every region's group estimate with its 95% interval
// (estimate ± t(df, 0.975) · std error), as figures/group_CONTRAST_TERM.png.
func WriteGroupFigures(out *Output, res *fit.GroupResult) ([]Figure, error) {
	contrasts, _ := groupOrder(res.Rows)
	var figs []Figure
	for _, c := range contrasts {
		var terms []string
		seen := map[string]bool{}
		for _, r := range res.Rows {
			if r.Contrast == c && !seen[r.Term] {
				seen[r.Term] = true
				terms = append(terms, r.Term)
			}
		}
		for _, term := range terms {
			if len(figs) == groupFigureLimit {
				return figs, nil
			}
			rows := groupRows(res.Rows, c, term)
			var labels []string
			var est, lo, hi []float64
			for _, r := range rows {
				half := fit.StudentTQuantile(0.975, r.DF) * r.StdError
				labels = append(labels, r.Region)
				est = append(est, r.Estimate)
				lo = append(lo, r.Estimate-half)
				hi = append(hi, r.Estimate+half)
			}
			if len(labels) == 0 {
				continue
			}
			name := "group_" + fileSafe(c) + "_" + fileSafe(term)
			caption := fmt.Sprintf("Contrast `%s`, term `%s`: each region's group estimate with its 95%% interval; intervals that do not cross zero mark regions whose effect has a consistent sign across subjects (before correction across regions: see q in the table).", c, term)
			f, err := GroupEffectsFigure(out, name, labels, est, lo, hi, caption)
			if err != nil {
				return nil, err
			}
			figs = append(figs, f)
		}
	}
	return figs, nil
}

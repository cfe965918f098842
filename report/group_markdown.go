package report

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/tessera-fmri/tessera/fit"
)

// PilotCaution is the group report's warning about planning from a pilot.
const PilotCaution = "Effect sizes from small pilots are inflated and uncertain: the regions that look " +
	"strongest were picked because their sample effect came out large, and with few subjects the 95% " +
	"interval of d is wide. Sample sizes computed from the observed d are therefore optimistic; plan with " +
	"the lower end of the interval too (the end nearer zero), and treat a study sized on the observed d as " +
	"the smallest that could work, not one that will."

// groupPowerRows is how many regions per contrast the power table shows.
const groupPowerRows = 5

// GroupReportInfo is what the group report says about its inputs.
type GroupReportInfo struct {
	Input        string // the subject table read
	Participants string // the participants table; empty for none
	Measure      string // the column analysed: psc or estimate
	Command      string
	Subjects     int // distinct subjects in the subject table
	Used         int // subjects in at least one model
	Warnings     []string
	Outputs      []string
	Figures      []Figure // shown in a Figures section when given
}

// WriteGroupMarkdown writes group-report.md.
func WriteGroupMarkdown(out *Output, res *fit.GroupResult, info GroupReportInfo) error {
	f, err := out.Create("group-report.md")
	if err != nil {
		return err
	}
	_, err = f.WriteString(GroupMarkdown(res, info))
	return err
}

// GroupMarkdown renders the group report: what was read, the model, the
// regions ranked per contrast and term, the pilot power of the strongest
// regions, warnings and cautions.
func GroupMarkdown(res *fit.GroupResult, info GroupReportInfo) string {
	var b strings.Builder
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	s := res.Spec
	unit := "percent of baseline"
	if info.Measure == "estimate" {
		unit = "signal units"
	}
	p("# Tessera group report\n\n")
	p("> **Caution.** %s\n\n", Caution)
	p("Command: `%s`\n\n", info.Command)

	contrasts, regions := groupOrder(res.Rows)
	p("## What was read\n\n")
	p("- Subject table: `%s`; %d subject(s), %d region(s), %d contrast(s); %d subject(s) in the models\n",
		info.Input, info.Subjects, len(regions), len(contrasts), info.Used)
	if info.Participants != "" {
		p("- Participants table: `%s`\n", info.Participants)
	}
	p("- Analysed: `%s` (%s), one value per subject, region and contrast\n\n", info.Measure, unit)

	p("## Model\n\n")
	switch {
	case len(s.Covariates) > 0:
		cols := []string{"an intercept"}
		if s.Compare != "" {
			cols = append(cols, fmt.Sprintf("the %s group (%s vs %s)", s.Compare, s.Levels[1], s.Levels[0]))
		}
		cols = append(cols, "covariates "+strings.Join(s.Covariates, ", "))
		p("- Per contrast and region, a linear model across subjects with %s, every column but the intercept mean-centred over the subjects in the model, so `mean` is the mean of the subjects' values and each other term a partial slope or adjusted difference\n", strings.Join(cols, ", "))
	case s.Compare != "":
		p("- `mean`: the one-sample t test across subjects (random effects on the subject-level estimates; Holmes and Friston 1998)\n")
		p("- `%s`: Welch's t test of group %s minus group %s (unequal variances, Welch-Satterthwaite degrees of freedom)\n", s.CompareTerm(), s.Levels[1], s.Levels[0])
	default:
		p("- `mean`: the one-sample t test across subjects, df = n - 1 (random effects on the subject-level estimates; Holmes and Friston 1998)\n")
	}
	if s.Weighted {
		p("- `--weighted`: mixed effects, each subject weighted by 1/(se² + τ²) with its own standard error; τ² by restricted maximum likelihood (Viechtbauer 2005), inference with the Knapp-Hartung adjustment (t with n - terms df)\n")
	}
	p("- Across regions, within each contrast and term: Benjamini-Hochberg q (false discovery rate) and Holm's adjusted p (family-wise error)\n")
	p("- Effect size: Cohen's d of the subjects' values (unweighted, unadjusted), 95%% interval by inverting the noncentral t (Steiger and Fouladi 1997)\n\n")

	p("## Results\n\n")
	p("Regions ranked by p within each contrast and term; every row is in `group.csv`. The estimate's interval is estimate ± t(df, 0.975) × std error.\n\n")
	for _, c := range contrasts {
		p("### Contrast `%s`\n\n", c)
		for _, term := range res.Terms {
			rows := groupRows(res.Rows, c, term)
			if len(rows) == 0 {
				continue
			}
			sort.SliceStable(rows, func(i, j int) bool { return rows[i].PValue < rows[j].PValue })
			p("Term `%s`:\n\n", term)
			tauHead, tauRule, tauEmpty := "", "", ""
			if s.Weighted {
				tauHead, tauRule, tauEmpty = " τ² |", " --- |", " |"
			}
			p("| region | n | estimate (95%% CI) | t | df | q | p (Holm) | d (95%% CI) |%s\n", tauHead)
			p("| --- | --- | --- | --- | --- | --- | --- | --- |%s\n", tauRule)
			for i, r := range rows {
				if i == topRows {
					p("| ... %d more in `group.csv` | | | | | | | |%s\n", len(rows)-topRows, tauEmpty)
					break
				}
				half := fit.StudentTQuantile(0.975, r.DF) * r.StdError
				d := "—"
				if !math.IsNaN(r.Effect.D) {
					d = fmt.Sprintf("%.2f (%.2f, %.2f)", r.Effect.D, r.Effect.Low, r.Effect.High)
				}
				p("| %s | %d | %.3g (%.3g, %.3g) | %.2f | %.3g | %s | %s | %s |", mdText(r.Region), r.N, r.Estimate,
					r.Estimate-half, r.Estimate+half, r.Statistic, r.DF, FormatQ(r.Q), FormatQ(r.PHolm), d)
				if s.Weighted {
					p(" %.3g |", r.Tau2)
				}
				p("\n")
			}
			p("\n")
		}
	}

	p("## Pilot power\n\n")
	p("> **Caution.** %s\n\n", PilotCaution)
	p("Subjects needed for 80%% and 90%% power at two-sided α = %g if the true effect were the observed d (exact noncentral t; per group, two equal groups, for a two-group term), and for 80%% at the end of d's 95%% interval nearer zero (— where the interval holds zero: the data are consistent with no effect, and no sample size follows). The last column is the smallest d this sample detects with 80%% power. The %d regions with the largest |d| per contrast; every row is in `power.csv`.\n\n",
		fit.PowerAlpha, groupPowerRows)
	p("| contrast | region | term | n | d (95%% CI) | n for 80%% | n for 90%% | n for 80%% at the cautious end | detectable d |\n")
	p("| --- | --- | --- | --- | --- | --- | --- | --- | --- |\n")
	for _, c := range contrasts {
		var rows []fit.GroupRow
		for _, r := range res.Rows {
			if r.Contrast == c && r.Power != nil && !math.IsNaN(r.Effect.D) {
				rows = append(rows, r)
			}
		}
		sort.SliceStable(rows, func(i, j int) bool { return math.Abs(rows[i].Effect.D) > math.Abs(rows[j].Effect.D) })
		for i, r := range rows {
			if i == groupPowerRows {
				break
			}
			pw := r.Power
			p("| %s | %s | %s | %d | %.2f (%.2f, %.2f) | %s | %s | %s | %.2f |\n", mdText(c), mdText(r.Region), mdText(r.Term), r.N,
				r.Effect.D, r.Effect.Low, r.Effect.High, sizeText(pw.NFor80, pw.Groups), sizeText(pw.NFor90, pw.Groups),
				sizeText(pw.NFor80AtEdge, pw.Groups), pw.Detectable)
		}
	}
	p("\n")

	if len(info.Figures) > 0 {
		p("## Figures\n\n")
		for _, f := range info.Figures {
			alt := strings.NewReplacer("[", "(", "]", ")", "\n", " ").Replace(f.Caption)
			p("![%s](%s)\n\n%s\n\n", alt, f.Path, f.Caption)
		}
	}
	if len(info.Warnings) > 0 {
		p("## Warnings\n\n")
		for _, w := range info.Warnings {
			p("- %s\n", w)
		}
		p("\n")
	}
	p("## Cautions\n\n")
	p("- %s\n", Caution)
	p("- %s\n", PilotCaution)
	p("- The tests assume the subjects' values are a random sample from a normal population (with --weighted, that each standard error is right); with few subjects an outlier moves every number here. q and Holm's p control errors across the regions of one contrast and term, not across contrasts or terms.\n")
	p("- The first-level estimates carry their own model assumptions: read the diagnostics of the fit report first.\n\n")
	if len(info.Outputs) > 0 {
		p("## Files\n\n")
		for _, f := range info.Outputs {
			p("- `%s`\n", f)
		}
	}
	return b.String()
}

// sizeText shows a sample size: per group for two groups; — when none.
func sizeText(n, groups int) string {
	switch {
	case n <= 0:
		return "—"
	case groups == 2:
		return fmt.Sprintf("%d per group", n)
	}
	return fmt.Sprint(n)
}

// groupOrder returns the contrasts and regions in order of first appearance.
func groupOrder(rows []fit.GroupRow) (contrasts, regions []string) {
	seenC, seenR := map[string]bool{}, map[string]bool{}
	for _, r := range rows {
		if !seenC[r.Contrast] {
			seenC[r.Contrast] = true
			contrasts = append(contrasts, r.Contrast)
		}
		if !seenR[r.Region] {
			seenR[r.Region] = true
			regions = append(regions, r.Region)
		}
	}
	return contrasts, regions
}

func groupRows(rows []fit.GroupRow, contrast, term string) []fit.GroupRow {
	var out []fit.GroupRow
	for _, r := range rows {
		if r.Contrast == contrast && r.Term == term {
			out = append(out, r)
		}
	}
	return out
}

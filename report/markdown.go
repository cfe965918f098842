package report

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/tessera-fmri/tessera/fit"
)

// Caution is the research-use statement every report and the README carry.
const Caution = "Tessera is research software. It is not for clinical decisions such as presurgical " +
	"mapping, which need validated clinical tools and licensed practice. Its results are only as good " +
	"as the preprocessing and the region definitions they start from."

// Flag thresholds of the report's diagnostics section.
const (
	// FlagLjungBox: whitened residuals still autocorrelated.
	FlagLjungBox = 0.01
	// FlagNormality: clearly non-normal residuals (Jarque-Bera).
	FlagNormality = 0.001
	// FlagTSNR: temporal signal-to-noise ratio below which a region's
	// estimates are noisy (common practice puts usable region tSNR well
	// above 20).
	FlagTSNR = 20.0
	// topRows is how many rows each ranked results table shows.
	topRows = 15
)

// ReportInfo is what the report says about the inputs beyond the fit.
type ReportInfo struct {
	Study   string // path of the study table, or the signals file in single-run form
	Command string
	Outputs []string
	// Figures, when given, are shown in a Figures section (see WriteFigures).
	Figures []Figure
}

// WriteMarkdown writes report.md.
func WriteMarkdown(out *Output, res *fit.StudyResult, info ReportInfo) error {
	f, err := out.Create("report.md")
	if err != nil {
		return err
	}
	_, err = f.WriteString(Markdown(res, info))
	return err
}

// Markdown renders the report.
func Markdown(res *fit.StudyResult, info ReportInfo) string {
	var b strings.Builder
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	o := res.Options
	p("# Tessera region GLM report\n\n")
	p("> **Caution.** %s\n\n", Caution)
	p("Command: `%s`\n\n", info.Command)

	// What was read.
	subjects := map[string]bool{}
	sessions := map[string]bool{}
	minV, maxV, vols := math.MaxInt, 0, 0
	regions := 0
	events := map[string]int{}
	for _, r := range res.Runs {
		s := r.Plan.Run.Spec
		subjects[s.Subject] = true
		if s.Session != "" {
			sessions[s.Session] = true
		}
		n := r.Plan.TotalVolumes
		vols += n
		minV, maxV = min(minV, n), max(maxV, n)
		regions = max(regions, len(r.Plan.Regions))
		for c, k := range r.Plan.Events {
			events[c] += k
		}
	}
	p("## What was read\n\n")
	p("- Input: `%s`\n", info.Study)
	p("- %d run(s) of %d subject(s)", len(res.Runs), len(subjects))
	if len(sessions) > 0 {
		p(" in %d session(s)", len(sessions))
	}
	p("; %d volumes in all, %d to %d per run\n", vols, minV, maxV)
	p("- %d region(s) per run (at most)\n", regions)
	conds := fit.Conditions(planList(res))
	var ev []string
	for _, c := range conds {
		ev = append(ev, fmt.Sprintf("`%s` (%d events)", c, events[c]))
	}
	if len(ev) == 0 {
		ev = []string{"none: nuisance-only models"}
	}
	p("- Conditions: %s\n\n", strings.Join(ev, ", "))

	p("## Model\n\n")
	p("- Response: %s (difference of gamma densities with shapes 6 and 16, undershoot ratio 1/6), convolved on a grid of at most TR/16 and sampled at (volume + %g) × TR\n", o.HRF, o.SliceRef)
	p("- Each condition's regressor is scaled so that one isolated event of the condition's median duration peaks at 1: `psc` is the peak response to one typical event, in percent of the region's mean signal\n")
	if o.Highpass > 0 {
		p("- Drift: discrete cosine terms for periods longer than %g s\n", o.Highpass)
	} else {
		p("- Drift: none (--highpass 0)\n")
	}
	p("- Noise: `%s`%s", o.Noise.Name, noiseSummary(res))
	p("\n- Contrasts: ")
	var cs []string
	for _, c := range res.Contrasts {
		cs = append(cs, fmt.Sprintf("`%s = %s`", c.Name, c.Expr))
	}
	p("%s\n\n", strings.Join(cs, ", "))

	p("### Design of each run\n\n")
	p("| run | TR (s) | volumes | terms | drift | motion | confounds | conditions (events) | condition number |\n")
	p("| --- | --- | --- | --- | --- | --- | --- | --- | --- |\n")
	for _, r := range res.Runs {
		d := r.Plan.Design
		count := map[fit.TermKind]int{}
		for _, t := range d.Terms {
			count[t.Kind]++
		}
		var ce []string
		for _, c := range d.Conditions {
			ce = append(ce, fmt.Sprintf("%s (%d)", c, r.Plan.Events[c]))
		}
		cond := "skipped: " + r.Plan.Skip
		if !r.Plan.Skipped() {
			cond = fmt.Sprintf("%.3g", r.Plan.Condition)
		}
		p("| %s | %g | %d | %d | %d | %d | %d | %s | %s |\n", r.Plan.Run.Spec.Key(), r.Plan.TR, r.Plan.Volumes,
			len(d.Terms), count[fit.TermDrift], count[fit.TermMotion], count[fit.TermConfound], strings.Join(ce, ", "), cond)
	}
	p("\nThe condition number is that of the design with every column scaled to unit length; designs above %.0g are refused.\n\n", fit.ConditionNumberLimit)
	writeAudit(p, res)

	p("## Results\n\n")
	p("Tables rank regions by |t| and show the strongest %d rows; every row is in `subject_contrasts.csv` (subject level) and `contrasts.csv` (run level). `psc` is in percent of the region's mean signal; `q` is the Benjamini-Hochberg adjusted p across regions (within one subject, or one run).\n\n", topRows)
	for _, c := range res.Contrasts {
		p("### Contrast `%s` = `%s`\n\n", c.Name, c.Expr)
		var rows []int
		var ts []float64
		for i := range res.Subjects {
			if res.Subjects[i].Contrast == c.Name {
				rows = append(rows, i)
				ts = append(ts, math.Abs(res.Subjects[i].Statistic))
			}
		}
		p("Subject level (runs combined by fixed effects):\n\n")
		p("| subject | region | runs | psc (%%) | t | df | q |\n| --- | --- | --- | --- | --- | --- | --- |\n")
		for i, k := range rankOrder(ts, largerFirst) {
			if i == topRows {
				break
			}
			s := &res.Subjects[rows[k]]
			p("| %s | %s | %d | %.3f | %.2f | %d | %s |\n", mdText(s.Subject), mdText(s.Region), s.Runs, s.PSC, s.Statistic, s.DF, FormatQ(s.Q))
		}
		if len(rows) == 0 {
			p("| (not estimated in any run) | | | | | | |\n")
		}
		type runRow struct {
			run    *fit.RunResult
			region int
		}
		var rr []runRow
		ts = ts[:0]
		ci := contrastIndex(res.Contrasts, c.Name)
		for _, r := range res.Runs {
			if r.Fit == nil || !r.Valid[ci] {
				continue
			}
			for ri := range r.Fit.Regions {
				if r.Fit.Regions[ri].Skip == "" {
					rr = append(rr, runRow{r, ri})
					ts = append(ts, math.Abs(r.Contrasts[ci][ri].Statistic))
				}
			}
		}
		p("\nRun level:\n\n")
		p("| run | region | psc (%%) | t | df | q |\n| --- | --- | --- | --- | --- | --- |\n")
		for i, k := range rankOrder(ts, largerFirst) {
			if i == topRows {
				break
			}
			x := rr[k]
			cf := x.run.Contrasts[ci][x.region]
			p("| %s | %s | %.3f | %.2f | %d | %s |\n", mdText(x.run.Plan.Run.Spec.Key()), mdText(x.run.Fit.Regions[x.region].Region), cf.PSC, cf.Statistic, cf.DF, FormatQ(x.run.Q[ci][x.region]))
		}
		p("\n")
	}

	writeFTests(p, res)
	p("## Diagnostics\n\n")
	var auto, nonNormal, lowSNR []string
	fitted := 0
	for _, r := range res.Runs {
		if r.Fit == nil {
			continue
		}
		for _, reg := range r.Fit.Regions {
			if reg.Skip != "" {
				continue
			}
			fitted++
			id := r.Plan.Run.Spec.Key() + " " + reg.Region
			if reg.LjungBoxP < FlagLjungBox {
				auto = append(auto, id+" ("+reg.NoiseName+")")
			}
			if reg.NormalityP < FlagNormality {
				nonNormal = append(nonNormal, id)
			}
			if reg.Baseline/reg.Sigma < FlagTSNR {
				lowSNR = append(lowSNR, id)
			}
		}
	}
	p("%d region fits checked (`diagnostics.csv` has every value).\n\n", fitted)
	flag := func(title, advice string, ids []string) {
		p("- **%s**: %d", title, len(ids))
		if len(ids) > 0 {
			shown := ids
			if len(shown) > 20 {
				shown = shown[:20]
			}
			p(" (%s", strings.Join(shown, "; "))
			if len(ids) > 20 {
				p("; and %d more", len(ids)-20)
			}
			p("). %s", advice)
		}
		p("\n")
	}
	flag(fmt.Sprintf("whitened residuals still autocorrelated (Ljung-Box p < %g)", FlagLjungBox),
		ljungBoxAdvice(res.Options.Noise), auto)
	flag(fmt.Sprintf("clearly non-normal residuals (Jarque-Bera p < %g)", FlagNormality),
		"Often spikes from motion or artefacts: look at the time course and consider confound terms for the affected volumes.", nonNormal)
	flag(fmt.Sprintf("low temporal SNR (baseline / sigma < %g)", FlagTSNR),
		"Estimates are noisy and psc may be unreliable; check the region's signal and size.", lowSNR)
	p("\n")
	writeFigureSection(p, res, info.Figures)

	if len(res.Warnings) > 0 {
		p("## Warnings\n\n")
		for _, w := range res.Warnings {
			p("- %s\n", w)
		}
		p("\n")
	}
	p("## Cautions\n\n")
	p("- %s\n", Caution)
	p("- p and q values assume the model is right: check the diagnostics above before reading them.\n")
	p("- Fixed-effects subject results describe these runs of this subject; they are not a population inference. Group inference needs the subjects' estimates taken to a random-effects test.\n\n")
	if len(info.Outputs) > 0 {
		p("## Files\n\n")
		for _, f := range info.Outputs {
			p("- `%s`\n", f)
		}
	}
	return b.String()
}

// FormatQ shows a q or p value for reading: three decimals, or two
// significant digits below 0.001; empty when missing.
func FormatQ(q float64) string {
	if math.IsNaN(q) {
		return ""
	}
	if q < 0.001 {
		return fmt.Sprintf("%.1e", q)
	}
	return fmt.Sprintf("%.3f", q)
}

func contrastIndex(cs []fit.Contrast, name string) int {
	for i, c := range cs {
		if c.Name == name {
			return i
		}
	}
	return -1
}

func planList(res *fit.StudyResult) []*fit.RunPlan {
	ps := make([]*fit.RunPlan, len(res.Runs))
	for i, r := range res.Runs {
		ps[i] = r.Plan
	}
	return ps
}

// writeAudit renders the design audit: per run the condition number, the
// largest correlation between conditions, the highest VIF, the lowest
// relative efficiency and the censored share, then the audit's warnings.
func writeAudit(p func(string, ...any), res *fit.StudyResult) {
	p("### Design audit\n\n")
	p("Every value is in `audit.csv`. VIF above %g or a correlation beyond %g between two conditions means their separate estimates are unstable.\n\n", res.Options.Audit.VIF, res.Options.Audit.Correlation)
	p("| run | largest correlation | highest VIF | lowest relative efficiency | censored |\n| --- | --- | --- | --- | --- |\n")
	var warns []string
	for _, r := range res.Runs {
		corr, vif, eff, cens := "", "", "", ""
		maxVIF, minEff := 0.0, math.Inf(1)
		vifItem, effItem := "", ""
		for _, a := range r.Plan.Audit {
			switch a.Measure {
			case "max_correlation":
				corr = fmt.Sprintf("%s: %.2f %s", a.Item, a.Value, a.Flag)
			case "vif":
				if a.Value > maxVIF {
					maxVIF, vifItem = a.Value, a.Item
				}
			case "relative_efficiency":
				if a.Value < minEff {
					minEff, effItem = a.Value, a.Item
				}
			case "censored_share":
				cens = fmt.Sprintf("%.1f%% %s", 100*a.Value, a.Flag)
			}
		}
		if vifItem != "" {
			vif = fmt.Sprintf("%s: %.2f", vifItem, maxVIF)
		}
		if effItem != "" {
			eff = fmt.Sprintf("%s: %.2f", effItem, minEff)
		}
		p("| %s | %s | %s | %s | %s |\n", r.Plan.Run.Spec.Key(), corr, vif, eff, cens)
		for _, w := range r.Plan.Warnings {
			if strings.Contains(w, "correlate at") || strings.Contains(w, "variance inflation") || strings.Contains(w, "censored (more than") {
				warns = append(warns, w)
			}
		}
	}
	p("\n")
	if len(warns) > 0 {
		p("Audit warnings:\n\n")
		for _, w := range warns {
			p("- %s\n", w)
		}
		p("\n")
	}
}

// writeFTests renders the strongest regions of each F test.
func writeFTests(p func(string, ...any), res *fit.StudyResult) {
	if len(res.FTests) == 0 {
		return
	}
	p("### F tests\n\n")
	p("Each F test asks whether any of its rows differs from zero; a condition's own test (models with derivatives or FIR bins) asks whether the region responds at all, whatever the shape. Every row is in `ftests.csv`.\n\n")
	for fi, t := range res.FTests {
		type row struct {
			run    *fit.RunResult
			region int
		}
		var rows []row
		var ps []float64
		for _, r := range res.Runs {
			if r.Fit == nil || !r.FValid[fi] {
				continue
			}
			for ri := range r.Fit.Regions {
				if r.Fit.Regions[ri].Skip == "" {
					rows = append(rows, row{r, ri})
					ps = append(ps, r.FTests[fi][ri].PValue)
				}
			}
		}
		p("`%s`:\n\n| run | region | F | df | p | q |\n| --- | --- | --- | --- | --- | --- |\n", t.Name)
		for i, k := range rankOrder(ps, smallerFirst) {
			if i == topRows {
				break
			}
			x := rows[k]
			f := x.run.FTests[fi][x.region]
			p("| %s | %s | %.2f | %d, %d | %s | %s |\n", mdText(x.run.Plan.Run.Spec.Key()), mdText(x.run.Fit.Regions[x.region].Region), f.Statistic, f.DFNum, f.DFDen, FormatQ(f.PValue), FormatQ(x.run.FQ[fi][x.region]))
		}
		p("\n")
	}
}

// rankOrder returns the indices of vs in the order that sort.SliceStable
// puts rows compared by before on their values vs: row rankOrder[0] first.
// It sorts small (value, index) pairs with slices.SortStableFunc, which is
// quicker than moving whole rows through reflection. sort.SliceStable and
// slices.SortStableFunc are the same algorithm (both generated from the
// standard library's sort/gen_sort_variants.go), whose moves depend only on
// the outcomes of its comparisons, so the order is the one sorting the rows
// with sort.SliceStable gives, ties and NaNs included (TestRankOrder).
func rankOrder(vs []float64, before func(a, b float64) bool) []int {
	type pair struct {
		v float64
		i int
	}
	ps := make([]pair, len(vs))
	for i, v := range vs {
		ps[i] = pair{v, i}
	}
	slices.SortStableFunc(ps, func(a, b pair) int {
		if before(a.v, b.v) {
			return -1
		}
		return 0
	})
	order := make([]int, len(ps))
	for i, p := range ps {
		order[i] = p.i
	}
	return order
}

// largerFirst and smallerFirst are comparisons for rankOrder: larger values
// first, smaller values first.
func largerFirst(a, b float64) bool  { return a > b }
func smallerFirst(a, b float64) bool { return a < b }

// mdText escapes a name (region, subject, condition) for a Markdown table
// cell or running text: a backslash before the characters Markdown gives a
// meaning (| ends a cell; * ` [ ] mark emphasis, code and links; < >
// start HTML), so that the name shows as it is written. An underscore
// inside a word (region_002) marks nothing in GitHub's Markdown and is
// left as it is.
func mdText(s string) string {
	if !strings.ContainsAny(s, "\\|*`[]<>") {
		return s
	}
	var b strings.Builder
	for _, r := range s {
		switch r {
		case '\\', '|', '*', '`', '[', ']', '<', '>':
			b.WriteByte('\\')
		}
		b.WriteRune(r)
	}
	return b.String()
}

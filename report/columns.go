package report

import (
	"fmt"
	"strings"
)

// ColumnDef documents one column of an output table.
type ColumnDef struct {
	Name    string
	Meaning string
	Unit    string
}

// TableDef documents one output table. The writers take their headers
// from here, and CodebookMarkdown renders the README's codebook from here,
// so the two cannot diverge (a test compares them).
type TableDef struct {
	File    string
	RowPer  string
	Columns []ColumnDef
}

// Header returns the column names in order.
func (t TableDef) Header() []string {
	h := make([]string, len(t.Columns))
	for i, c := range t.Columns {
		h[i] = c.Name
	}
	return h
}

var (
	colSubject = ColumnDef{"subject", "subject label from the study table", ""}
	colSession = ColumnDef{"session", "session label; empty where the study has none", ""}
	colRun     = ColumnDef{"run", "run label from the study table", ""}
	colRegion  = ColumnDef{"region", "region name from the signals table header", ""}
)

// Estimates, Contrasts, SubjectContrasts and Diagnostics are the tables of
// a first-level fit, columns in contract order.
var (
	Estimates = TableDef{"estimates.csv", "subject, session, run, region, term", []ColumnDef{
		colSubject, colSession, colRun, colRegion,
		{"term", "design term: a condition name, drift:K, motion:COLUMN, confound:COLUMN or intercept", ""},
		{"estimate", "GLS (or OLS with --noise none) estimate of the term's coefficient", "signal units per unit of the regressor"},
		{"std_error", "standard error of the estimate", "as estimate"},
		{"statistic", "t = estimate / std_error", ""},
		{"df", "residual degrees of freedom, volumes - rank of the design", ""},
		{"p_value", "two-sided p from Student's t with df", ""},
		{"psc", "100 * estimate / baseline for condition terms: the peak response to one typical event; empty for other terms, and where the baseline is not positive or below sigma (signals not in raw units)", "percent of baseline"},
	}}
	Contrasts = TableDef{"contrasts.csv", "subject, session, run, region, contrast", []ColumnDef{
		colSubject, colSession, colRun, colRegion,
		{"contrast", "contrast name (--contrast NAME = EXPR; by default one per condition)", ""},
		{"estimate", "c'β, the weighted sum of condition estimates", "signal units"},
		{"std_error", "sqrt(c' Cov(β) c)", "signal units"},
		{"statistic", "t = estimate / std_error", ""},
		{"df", "residual degrees of freedom of the run", ""},
		{"p_value", "two-sided p from Student's t with df", ""},
		{"q_value", "Benjamini-Hochberg adjusted p across the regions of this run and contrast", ""},
		{"psc", "100 * estimate / baseline; empty where the baseline is not positive or below sigma (signals not in raw units)", "percent of baseline"},
	}}
	SubjectContrasts = TableDef{"subject_contrasts.csv", "subject, region, contrast", []ColumnDef{
		colSubject, colRegion,
		{"contrast", "contrast name", ""},
		{"runs", "number of runs combined", ""},
		{"estimate", "fixed-effects (inverse-variance weighted) mean of the run estimates", "signal units"},
		{"std_error", "1 / sqrt(sum of 1/se² over runs)", "signal units"},
		{"statistic", "t = estimate / std_error", ""},
		{"df", "sum of the runs' degrees of freedom", ""},
		{"p_value", "two-sided p from Student's t with df", ""},
		{"q_value", "Benjamini-Hochberg adjusted p across the regions of this subject and contrast", ""},
		{"psc", "the runs' psc averaged with the same weights; empty if any run's is", "percent of baseline"},
	}}
	Diagnostics = TableDef{"diagnostics.csv", "subject, session, run, region", []ColumnDef{
		colSubject, colSession, colRun, colRegion,
		{"volumes", "volumes in the run", ""},
		{"censored", "volumes censored", ""},
		{"df", "residual degrees of freedom; empty when the region or run was not fitted", ""},
		{"sigma", "standard deviation of the modelled noise (for AR models the marginal one, innovation sd · sqrt(g0))", "signal units"},
		{"r_squared", "1 - residual sum of squares / total sum of squares about the mean, on the unwhitened signal over the kept (not censored) volumes; below 0 when the GLS fit leaves more than the mean does (strong autocorrelation lets it move away from least squares: check the drift terms and the noise model)", ""},
		{"noise", "noise model the region was fitted with: none, ar1, ar:P or arma; under --noise auto the region's choice, auto:ar1, auto:ar:P or auto:arma; skipped:REASON when the region or run was not fitted", ""},
		{"ar_order", "AR order P (0 for none; 1 for arma)", ""},
		{"ar_coefficients", "a_1 ... a_P of e_t = a_1 e_{t-1} + ... + a_P e_{t-P} + u_t, space-separated, bias-corrected; for arma φ of e_t = φ e_{t-1} + u_t + θ u_{t-1}", ""},
		{"durbin_watson", "Durbin-Watson statistic of the whitened residuals (about 2 when white)", ""},
		{"ljung_box_p", "Ljung-Box p on the whitened residuals, lag min(10, volumes/5), df lag - (number of noise parameters: P, or 2 for arma); empty when that df is below 1", ""},
		{"normality_p", "Jarque-Bera p on the whitened residuals", ""},
		{"tsnr", "baseline / sigma", ""},
		{"ma_coefficients", "for arma, θ of e_t = φ e_{t-1} + u_t + θ u_{t-1}; empty for AR models", ""},
		{"white_share", "for arma read as AR(1) plus white noise (θ between -φ and 0): the share of the noise variance that is white, 1 - ρ_1/φ; empty otherwise", ""},
		{"noise_scope", "region (the model was estimated from this region) or run (--noise-pool: one model from all regions of the run)", ""},
		{"noise_passes", "estimation passes until the modelled autocorrelation moved by less than 0.1/sqrt(volumes) (at most 8); for arma, evaluations of the REML deviance", ""},
	}}
)

// Tables lists every table a first-level fit writes, in codebook order.
var Tables = []TableDef{Estimates, Contrasts, SubjectContrasts, Diagnostics, Motion, AuditTable, FTests, Responses, Autocorrelation}

// CodebookMarkdown renders the output codebook: one section per table with
// every column's meaning and unit.
func CodebookMarkdown() string {
	var b strings.Builder
	for _, t := range allTables() {
		fmt.Fprintf(&b, "#### `%s` (one row per %s)\n\n", t.File, t.RowPer)
		b.WriteString("| column | meaning | unit |\n| --- | --- | --- |\n")
		for _, c := range t.Columns {
			fmt.Fprintf(&b, "| `%s` | %s | %s |\n", c.Name, c.Meaning, c.Unit)
		}
		b.WriteString("\n")
	}
	b.WriteString("`design/<subject>[_<session>]_<run>.csv`: one row per volume, one column per design term in design order, header = term names.\n")
	return b.String()
}

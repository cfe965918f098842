package report

// GroupResults and PilotPower are the tables of `tessera group`, columns in
// contract order (../shared/INTERFACE.md, "Added with the group issue").
var (
	GroupResults = TableDef{"group.csv", "contrast, region, term", []ColumnDef{
		{"contrast", "contrast name from the subject table", ""},
		{"region", "region name from the subject table", ""},
		{"term", "mean (the one-sample test, or the intercept of a model with mean-centred covariates), COLUMN:LEVEL_B-LEVEL_A (group B minus group A, levels in sorted order) or covariate:NAME (slope)", ""},
		{"n", "subjects in the model", ""},
		{"estimate", "mean of the subjects' values (weighted by 1/(se² + tau2) with --weighted); for a two-group term the difference B - A; for a covariate the slope", "percent of baseline (signal units with --measure estimate); a slope per unit of the covariate"},
		{"std_error", "standard error of the estimate (Knapp-Hartung with --weighted)", "as estimate"},
		{"statistic", "t = estimate / std_error", ""},
		{"df", "degrees of freedom: n - 1 (one sample), Welch-Satterthwaite (two groups, no covariates), n - terms (covariates, --weighted)", ""},
		{"p_value", "two-sided p from Student's t with df", ""},
		{"q_value", "Benjamini-Hochberg adjusted p across the regions of this contrast and term", ""},
		{"p_holm", "Holm adjusted p (family-wise error) across the regions of this contrast and term", ""},
		{"effect_size", "Cohen's d of the subjects' values, unweighted and unadjusted: mean / sd for mean, (mean B - mean A) / pooled sd for two groups; empty for covariates", "standard deviations"},
		{"effect_low", "lower end of the 95% interval of d, from the noncentral t (Steiger and Fouladi 1997)", "standard deviations"},
		{"effect_high", "upper end of that interval", "standard deviations"},
		{"tau2", "between-subject variance by REML with --weighted; empty otherwise", "square of the estimate's unit"},
	}}
	PilotPower = TableDef{"power.csv", "contrast, region, term (mean and two-group terms)", []ColumnDef{
		{"contrast", "contrast name", ""},
		{"region", "region name", ""},
		{"term", "mean or COLUMN:LEVEL_B-LEVEL_A, as in group.csv (covariates have no Cohen's d and no row)", ""},
		{"n", "subjects in the model (both groups together for a two-group term)", ""},
		{"effect_size", "Cohen's d as in group.csv", "standard deviations"},
		{"n_for_80", "subjects needed for 80% power (per group, two equal groups, for a two-group term) at two-sided alpha 0.05 if the true d were effect_size; exact noncentral t; empty when d is 0 or above 10^7 subjects would be needed", ""},
		{"n_for_90", "the same for 90% power", ""},
		{"detectable_effect", "smallest d detected with 80% power at two-sided alpha 0.05 with the current n (the current group sizes for two groups)", "standard deviations"},
	}}
)

// GroupTables lists the tables `tessera group` writes, in codebook order.
var GroupTables = []TableDef{GroupResults, PilotPower}

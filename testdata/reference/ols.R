# ols_lm.csv and ols_summary.csv: base R lm() on ols_input.csv, lmtest::dwtest, stats::Box.test.
# Usage: Rscript ols.R [OUTDIR]   (inputs are read from this script's folder)
here <- local({
  f <- sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))
  dirname(normalizePath(f[1]))
})
args <- commandArgs(TRUE)
out <- if (length(args) >= 1) args[1] else here
dir.create(out, showWarnings = FALSE, recursive = TRUE)
num <- function(x) sprintf("%.17g", x)

suppressPackageStartupMessages(library(lmtest))
d <- read.csv(file.path(here, "ols_input.csv"))

fit <- lm(y ~ 0 + x_intercept + x_trend + x_a + x_b, data = d)
co <- summary(fit)$coefficients
lm_out <- data.frame(term = rownames(co),
                     estimate = num(co[, "Estimate"]),
                     std_error = num(co[, "Std. Error"]),
                     statistic = num(co[, "t value"]),
                     p_value = num(co[, "Pr(>|t|)"]))
write.csv(lm_out, file.path(out, "ols_lm.csv"), row.names = FALSE, quote = FALSE)

# Centred R^2: same model written with a real intercept.
fit_c <- lm(y ~ x_trend + x_a + x_b, data = d)
dw <- dwtest(fit)
lb <- Box.test(residuals(fit), lag = 10, type = "Ljung-Box", fitdf = 0)
summ <- data.frame(sigma = num(summary(fit)$sigma),
                   r_squared = num(summary(fit_c)$r.squared),
                   df_residual = num(fit$df.residual),
                   durbin_watson = num(unname(dw$statistic)),
                   ljung_box_lag = num(unname(lb$parameter)),
                   ljung_box_statistic = num(unname(lb$statistic)),
                   ljung_box_p = num(lb$p.value))
write.csv(summ, file.path(out, "ols_summary.csv"), row.names = FALSE, quote = FALSE)

# Design-issue references on the committed regression input ../ols_input.csv:
#  vif.csv   car::vif (r-cran-car) of lm(y ~ x_trend + x_a + x_b)
#  anova.csv F test of x_a and x_b jointly, R's anova() of nested lm() fits,
#            on the data as given (ols) and after exact AR(1) whitening with a
#            fixed coefficient 0.4 (gls; Prais-Winsten first row)
# Usage: Rscript design.R [OUTDIR]   (inputs are read from the parent folder)
here <- local({
  f <- sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))
  dirname(normalizePath(f[1]))
})
args <- commandArgs(TRUE)
out <- if (length(args) >= 1) args[1] else here
dir.create(out, showWarnings = FALSE, recursive = TRUE)
num <- function(x) sprintf("%.17g", x)
suppressPackageStartupMessages(library(car))

d <- read.csv(file.path(here, "..", "ols_input.csv"))
v <- vif(lm(y ~ x_trend + x_a + x_b, data = d))
write.csv(data.frame(term = names(v), vif = num(unname(v))), file.path(out, "vif.csv"),
          row.names = FALSE, quote = FALSE)

whiten <- function(x, a) {
  n <- length(x)
  c(sqrt(1 - a^2) * x[1], x[-1] - a * x[-n])
}
ftest <- function(dd) {
  small <- lm(y ~ 0 + x_intercept + x_trend, data = dd)
  big <- lm(y ~ 0 + x_intercept + x_trend + x_a + x_b, data = dd)
  a <- anova(small, big)
  c(a$F[2], a$Df[2], a$Res.Df[2], a$`Pr(>F)`[2])
}
w <- as.data.frame(lapply(d, whiten, a = 0.4))
rows <- rbind(ftest(d), ftest(w))
res <- data.frame(model = c("ols", "gls_ar1_0.4"), statistic = num(rows[, 1]),
                  df_num = num(rows[, 2]), df_den = num(rows[, 3]), p_value = num(rows[, 4]))
write.csv(res, file.path(out, "anova.csv"), row.names = FALSE, quote = FALSE)

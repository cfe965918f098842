# Reference values for the group level (tessera group): see README.md in this folder.
# Usage: Rscript group.R [OUTDIR]   (default: this script's folder)
# Needs Debian's r-base-core (stats) and r-cran-metafor.
suppressPackageStartupMessages(library(metafor))
here <- local({
  f <- sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))
  dirname(normalizePath(f[1]))
})
args <- commandArgs(TRUE)
out <- if (length(args) >= 1) args[1] else here
dir.create(out, showWarnings = FALSE, recursive = TRUE)
num <- function(x) ifelse(is.na(x), "", sprintf("%.17g", x))
write_ref <- function(df, name) {
  df[] <- lapply(df, function(col) if (is.numeric(col)) num(col) else col)
  write.csv(df, file.path(out, name), row.names = FALSE, quote = FALSE, na = "")
}
RNGkind("Mersenne-Twister", "Inversion", "Rejection")
set.seed(20261501)

## ---------------------------------------------------------------------------
## Input: a simulated subject_contrasts.csv for 17 subjects, 6 regions, 2 contrasts.
## Subjects 01-16 are the participants of ds001 (participants.tsv: sex, age);
## subject 17 is not in that table. Subject 05 has no estimate for glint/spire.
part <- read.delim(file.path(here, "..", "..", "bids", "ds001", "participants.tsv"),
                   stringsAsFactors = FALSE)
part$subject <- sub("^sub-", "", part$participant_id)
subjects <- sprintf("%02d", 1:17)
sex <- c(part$sex, "F")                 # subject 17's values drive the simulation only
age <- c(part$age, 23)
regions <- c("lantern_left", "keel", "spire", "brook_right", "anvil", "loft")
contrasts <- c("order", "glint")
baseline <- runif(17, 800, 1200)        # each subject's mean signal
rows <- list()
for (ci in seq_along(contrasts)) for (ri in seq_along(regions)) {
  mu    <- c(0.45, 0.30, 0.05, 0.20, 0.00, 0.60)[ri] * c(1, 0.8)[ci]
  delta <- c(0.00, 0.25, 0.00, 0.30, 0.00, -0.20)[ri]   # M - F
  slope <- c(0.00, 0.00, 0.03, 0.00, 0.00, 0.02)[ri]    # per year of age
  tau   <- c(0.15, 0.10, 0.00, 0.20, 0.00, 0.25)[ri]    # between-subject sd
  se_psc <- runif(17, 0.05, 0.25)
  psc <- mu + delta * (sex == "M") + slope * (age - 23) + tau * rnorm(17) + se_psc * rnorm(17)
  est <- psc * baseline / 100
  se <- se_psc * baseline / 100
  df <- rep(474, 17)
  stat <- est / se
  p <- 2 * pt(-abs(stat), df)
  rows[[length(rows) + 1]] <- data.frame(subject = subjects, region = regions[ri],
    contrast = contrasts[ci], runs = 2L, estimate = est, std_error = se, statistic = stat,
    df = df, p_value = p, psc = 100 * est / baseline, stringsAsFactors = FALSE)
}
sc <- do.call(rbind, rows)
gone <- sc$subject == "05" & sc$contrast == "glint" & sc$region == "spire"
sc[gone, c("estimate", "std_error", "statistic", "p_value", "psc")] <- NA
# q_value: BH across the regions of one (subject, contrast), as tessera fit writes it.
sc$q_value <- ave(sc$p_value, sc$subject, sc$contrast, FUN = function(p) p.adjust(p, "BH"))
sc <- sc[order(match(sc$subject, subjects), match(sc$contrast, contrasts), match(sc$region, regions)),
         c("subject", "region", "contrast", "runs", "estimate", "std_error", "statistic", "df",
           "p_value", "q_value", "psc")]
write_ref(sc, "subject_contrasts.csv")
# Read back what was written, so every value below is computed from the committed text.
sc <- read.csv(file.path(out, "subject_contrasts.csv"), colClasses = c(subject = "character"))

## ---------------------------------------------------------------------------
## Group models, per (contrast, region): y = psc, se = std_error * psc / estimate.
d_interval <- function(d, df, scale) {
  t <- d * scale
  f <- function(target) uniroot(function(ncp) pt(t, df, ncp) - target, c(t - 5, t + 5),
                                extendInt = "downX", tol = 1e-13)$root / scale
  c(f(0.975), f(0.025))
}
cohen1 <- function(y) { d <- mean(y) / sd(y); c(d, d_interval(d, length(y) - 1, sqrt(length(y)))) }
cohen2 <- function(a, b) {
  na <- length(a); nb <- length(b)
  sp <- sqrt(((na - 1) * var(a) + (nb - 1) * var(b)) / (na + nb - 2))
  d <- (mean(b) - mean(a)) / sp
  c(d, d_interval(d, na + nb - 2, 1 / sqrt(1 / na + 1 / nb)))
}
ctl <- list(threshold = 1e-12, maxiter = 10000, stepadj = 0.5)
row <- function(term, n, est, se, stat, df, p, eff = c(NA, NA, NA), tau2 = NA)
  data.frame(term = term, n = n, estimate = est, std_error = se, statistic = stat, df = df,
             p_value = p, effect_size = eff[1], effect_low = eff[2], effect_high = eff[3],
             tau2 = tau2, stringsAsFactors = FALSE)
from_t <- function(term, tt, eff = c(NA, NA, NA))
  row(term, NA, unname(tt$estimate[1] - if (length(tt$estimate) > 1) tt$estimate[2] else 0),
      tt$stderr, unname(tt$statistic), unname(tt$parameter), tt$p.value, eff)
from_lm <- function(terms, fit, effs) {
  s <- summary(fit)$coefficients
  do.call(rbind, lapply(seq_along(terms), function(j)
    row(terms[j], NA, s[j, 1], s[j, 2], s[j, 3], fit$df.residual, s[j, 4], effs[[j]])))
}
from_rma <- function(terms, fit, effs) {
  do.call(rbind, lapply(seq_along(terms), function(j)
    row(terms[j], NA, fit$beta[j], fit$se[j], fit$zval[j], fit$ddf[min(j, length(fit$ddf))], fit$pval[j], effs[[j]], fit$tau2)))
}
none <- c(NA, NA, NA)
analyse <- function(analysis, y, se, sex, age) {
  g <- as.numeric(sex == "M"); gc <- g - mean(g); agec <- age - mean(age)
  a <- y[sex == "F"]; b <- y[sex == "M"]
  gterm <- "sex:M-F"
  r <- switch(analysis,
    one_sample = from_t("mean", t.test(y), cohen1(y)),
    compare = rbind(from_t("mean", t.test(y), cohen1(y)),
                    from_t(gterm, t.test(b, a), cohen2(a, b))),       # Welch: var.equal = FALSE
    covariate = from_lm(c("mean", "covariate:age"), lm(y ~ agec), list(cohen1(y), none)),
    compare_covariate = from_lm(c("mean", gterm, "covariate:age"), lm(y ~ gc + agec),
                                list(cohen1(y), cohen2(a, b), none)),
    weighted = from_rma("mean", rma(yi = y, sei = se, method = "REML", test = "knha", control = ctl),
                        list(cohen1(y))),
    weighted_compare = rbind(
      from_rma("mean", rma(yi = y, sei = se, method = "REML", test = "knha", control = ctl), list(cohen1(y))),
      from_rma(c("intercept", gterm), rma(yi = y, sei = se, mods = ~ gc, method = "REML", test = "knha",
                                           control = ctl), list(none, cohen2(a, b)))[2, ]),
    weighted_covariate = from_rma(c("mean", "covariate:age"),
      rma(yi = y, sei = se, mods = ~ agec, method = "REML", test = "knha", control = ctl),
      list(cohen1(y), none)))
  r$n <- length(y)
  r
}
analyses <- c("one_sample", "compare", "covariate", "compare_covariate", "weighted",
              "weighted_compare", "weighted_covariate")
res <- list()
for (an in analyses) for (cn in contrasts) for (rn in regions) {
  d <- sc[sc$contrast == cn & sc$region == rn & !is.na(sc$psc), ]
  if (an != "one_sample" && an != "weighted") d <- d[d$subject %in% part$subject, ]
  m <- match(d$subject, part$subject)
  r <- analyse(an, d$psc, d$std_error * d$psc / d$estimate, part$sex[m], part$age[m])
  res[[length(res) + 1]] <- cbind(data.frame(analysis = an, contrast = cn, region = rn,
                                             stringsAsFactors = FALSE), r)
}
gr <- do.call(rbind, res)
key <- paste(gr$analysis, gr$contrast, gr$term)
gr$q_value <- ave(gr$p_value, key, FUN = function(p) p.adjust(p, "BH"))
gr$p_holm <- ave(gr$p_value, key, FUN = function(p) p.adjust(p, "holm"))
gr <- gr[, c("analysis", "contrast", "region", "term", "n", "estimate", "std_error", "statistic",
             "df", "p_value", "q_value", "p_holm", "effect_size", "effect_low", "effect_high", "tau2")]
write_ref(gr, "group_results.csv")

## ---------------------------------------------------------------------------
## Pilot power of every row with an effect size (power.csv of tessera group).
strict_power <- function(d, n1, n2) {      # the p.body of power.t.test(strict = TRUE), any n1, n2
  nu <- if (n2 == 0) n1 - 1 else n1 + n2 - 2
  ncp <- if (n2 == 0) sqrt(n1) * d else d / sqrt(1 / n1 + 1 / n2)
  qu <- qt(0.05 / 2, nu, lower.tail = FALSE)
  pt(qu, nu, ncp = ncp, lower.tail = FALSE) + pt(-qu, nu, ncp = ncp, lower.tail = TRUE)
}
size <- function(d, power, type) {
  if (is.na(d) || d == 0) return(NA)
  max(2, ceiling(power.t.test(delta = abs(d), power = power, type = type, strict = TRUE, tol = 1e-10)$n))
}
pw <- gr[!is.na(gr$effect_size), c("analysis", "contrast", "region", "term", "n", "effect_size")]
pw$n_for_80 <- NA; pw$n_for_90 <- NA; pw$detectable_effect <- NA
for (i in seq_len(nrow(pw))) {
  two <- pw$term[i] != "mean"
  type <- if (two) "two.sample" else "one.sample"
  pw$n_for_80[i] <- size(pw$effect_size[i], 0.8, type)
  pw$n_for_90[i] <- size(pw$effect_size[i], 0.9, type)
  if (!two) {
    pw$detectable_effect[i] <- power.t.test(n = pw$n[i], power = 0.8, type = "one.sample",
                                            strict = TRUE, tol = 1e-12)$delta
  } else {
    # Unequal groups: power.t.test takes one n, so the same strict power is solved here.
    d <- sc[sc$contrast == pw$contrast[i] & sc$region == pw$region[i] & !is.na(sc$psc) &
              sc$subject %in% part$subject, ]
    sx <- part$sex[match(d$subject, part$subject)]
    n1 <- sum(sx == "F"); n2 <- sum(sx == "M")
    pw$detectable_effect[i] <- uniroot(function(x) strict_power(x, n1, n2) - 0.8, c(1e-7, 10),
                                       extendInt = "upX", tol = 1e-12)$root
  }
}
write_ref(pw, "group_power.csv")

## ---------------------------------------------------------------------------
## Noncentral t: pt(q, df, ncp), both tails, on a grid that reaches every branch of R's pnt
## (series; ncp^2 > 1415 normal approximation; df > 4e5; t < 0 with ncp > 40).
g <- expand.grid(ncp = c(-3, -0.5, 0.7, 2.5, 8, 39), df = c(1, 4, 15, 60, 5e5),
                 t = c(-4, -1.3, 0, 0.4, 2.1, 6, 45))
g <- rbind(g, data.frame(ncp = c(41, 38, 0.5), df = c(10, 30, 8), t = c(-2, 40, 1.7)))
# R warns "full precision may not have been achieved" where the lower tail is above 1 - 1e-10:
# the series' absolute error bound (1e-12) is then most of the upper tail. Kept, warnings muted.
write_ref(data.frame(t = g$t, df = g$df, ncp = g$ncp,
                     lower = suppressWarnings(pt(g$t, g$df, g$ncp)),
                     upper = suppressWarnings(pt(g$t, g$df, g$ncp, lower.tail = FALSE))), "pnt.csv")

## Sample sizes: power.t.test(strict = TRUE) for one and two samples, n = ceiling of its root
## (tol 1e-10), with the strict power at n and n - 1 (qt for the critical value).
pg <- expand.grid(d = c(0.2, 0.35, 0.5, 0.8, 1.1, 1.6, 2.4), power = c(0.8, 0.9),
                  type = c("one.sample", "two.sample"), stringsAsFactors = FALSE)
pg$n_root <- mapply(function(d, p, ty) power.t.test(delta = d, power = p, type = ty, strict = TRUE,
                                                    tol = 1e-10)$n, pg$d, pg$power, pg$type)
pg$n <- ceiling(pg$n_root)
two <- pg$type == "two.sample"
pg$q_crit <- qt(0.025, ifelse(two, 2 * (pg$n - 1), pg$n - 1), lower.tail = FALSE)
pg$power_at_n <- mapply(function(d, n, ty) power.t.test(n = n, delta = d, type = ty, strict = TRUE)$power,
                        pg$d, pg$n, pg$type)
pg$power_below <- mapply(function(d, n, ty) power.t.test(n = n, delta = d, type = ty, strict = TRUE)$power,
                         pg$d, pg$n - 1, pg$type)
write_ref(pg, "sample_size.csv")

## Smallest effect with 80% power: power.t.test(n, power = 0.8, strict = TRUE, tol = 1e-12)$delta.
dg <- expand.grid(n = c(3, 6, 10, 16, 40, 200), type = c("one.sample", "two.sample"),
                  stringsAsFactors = FALSE)
dg$delta <- mapply(function(n, ty) power.t.test(n = n, power = 0.8, type = ty, strict = TRUE,
                                                tol = 1e-12)$delta, dg$n, dg$type)
write_ref(dg, "detectable.csv")

## Cohen's d interval by inverting the noncentral t (uniroot on pt, tol 1e-13).
ig <- expand.grid(d = c(-1.2, 0.1, 0.6, 1.5, 3), n = c(4, 9, 25))
lim <- t(mapply(function(d, n) d_interval(d, n - 1, sqrt(n)), ig$d, ig$n))
write_ref(data.frame(d = ig$d, n = ig$n, low = lim[, 1], high = lim[, 2]), "d_interval.csv")

## Holm on the p values of ../bh_input.csv (ties, an exact 1).
p <- read.csv(file.path(here, "..", "bh_input.csv"))$p
write_ref(data.frame(p = p, p_holm = p.adjust(p, method = "holm")), "holm.csv")

# Noise-model references (the noise issue); every output is described in README.md here.
#  series.csv          three committed series, generated here (seed below)
#  ar_yw.csv           stats::ar.yw, order fixed (aic = FALSE), orders 1-4
#  ar_mle.csv          stats::ar.mle, order fixed (aic = FALSE), orders 1-4 (converged 0: optimiser warned;
#                      agrees_exact 1: within 1e-3 of stats::arima's exact maximum likelihood)
#  ar_ml_exact.csv     stats::arima(method = "ML"), orders 1-4: the exact maximum-likelihood fit, its
#                      log-likelihood, and the exact log-likelihood at ar.mle's estimates
#  ar_aic.csv          stats::ar(aic = TRUE, order.max = 8), Yule-Walker: AIC per order, chosen order
#  arma_input.csv      a regression with AR(1) plus white noise, generated here
#  arma_reml.csv       nlme::gls(corARMA(p = 1, q = 1), method = "REML"): phi, theta, logLik, sigma
#  arma_reml_coef.csv  the same fit: estimates and standard errors
# Usage: Rscript noise.R [OUTDIR]
here <- local({
  f <- sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))
  dirname(normalizePath(f[1]))
})
args <- commandArgs(TRUE)
out <- if (length(args) >= 1) args[1] else here
dir.create(out, showWarnings = FALSE, recursive = TRUE)
num <- function(x) sprintf("%.17g", x)
suppressPackageStartupMessages(library(nlme))

RNGkind("Mersenne-Twister", "Inversion", "Rejection")
set.seed(20261205)
ar2 <- 10 + as.numeric(arima.sim(list(ar = c(0.5, -0.3)), n = 300, n.start = 200))
ar1w <- as.numeric(arima.sim(list(ar = 0.6), n = 300, n.start = 200)) + rnorm(300, sd = 1.25)
ar1 <- -3 + as.numeric(arima.sim(list(ar = 0.8), n = 300, n.start = 200))
# Round to 12 significant digits so that the committed text is the series.
series <- list(ar2 = signif(ar2, 12), ar1_white = signif(ar1w, 12), ar1 = signif(ar1, 12))
write.csv(data.frame(ar2 = num(series$ar2), ar1_white = num(series$ar1_white), ar1 = num(series$ar1)),
          file.path(out, "series.csv"), row.names = FALSE, quote = FALSE)

# converged is 0 where the fit warned that its optimiser had not converged
# (arima0 under ar.mle): those rows are not a reference.
long <- function(fun) {
  rows <- list()
  for (s in names(series)) for (p in 1:4) {
    ok <- 1L
    f <- withCallingHandlers(fun(series[[s]], aic = FALSE, order.max = p, demean = TRUE),
                             warning = function(w) { ok <<- 0L; invokeRestart("muffleWarning") })
    terms <- c(paste0("a", seq_len(p)), "var_pred", "x_mean")
    vals <- c(as.numeric(f$ar), f$var.pred, f$x.mean)
    rows[[length(rows) + 1]] <- data.frame(series = s, order = p, term = terms, value = num(vals), converged = ok)
  }
  do.call(rbind, rows)
}
write.csv(long(ar.yw), file.path(out, "ar_yw.csv"), row.names = FALSE, quote = FALSE)
mle <- long(ar.mle)

# ar.mle fits by arima0, whose likelihood switches to fast recursions once
# the Kalman gain has settled to delta = 0.01 and whose optimiser can stop
# early; stats::arima(method = "ML") maximises the exact likelihood. Both
# are recorded: ar_ml_exact.csv holds arima's optimum, its log-likelihood,
# and the exact log-likelihood at ar.mle's estimates; agrees_exact in
# ar_mle.csv is 1 where ar.mle's coefficients are within 1e-3 of arima's.
rows <- list()
agree <- c()
for (s in names(series)) for (p in 1:4) {
  x <- series[[s]]
  ex <- arima(x, order = c(p, 0, 0), method = "ML", optim.control = list(maxit = 2000, reltol = 1e-14))
  m <- mle[mle$series == s & mle$order == p, ]
  am <- as.numeric(m$value[seq_len(p)])
  mm <- as.numeric(m$value[m$term == "x_mean"])
  at <- arima(x, order = c(p, 0, 0), method = "ML", fixed = c(am, mm), transform.pars = FALSE)
  cf <- coef(ex)
  agree <- c(agree, rep(as.integer(max(abs(cf[seq_len(p)] - am)) <= 1e-3), p + 2))
  rows[[length(rows) + 1]] <- data.frame(series = s, order = p,
    term = c(paste0("a", seq_len(p)), "x_mean", "sigma2", "loglik", "loglik_at_ar_mle"),
    value = num(c(cf[seq_len(p)], cf[["intercept"]], ex$sigma2, ex$loglik, at$loglik)))
}
mle$agrees_exact <- agree
write.csv(mle, file.path(out, "ar_mle.csv"), row.names = FALSE, quote = FALSE)
write.csv(do.call(rbind, rows), file.path(out, "ar_ml_exact.csv"), row.names = FALSE, quote = FALSE)

rows <- list()
for (s in names(series)) {
  f <- ar(series[[s]], aic = TRUE, order.max = 8, method = "yule-walker")
  rows[[length(rows) + 1]] <- data.frame(series = s, order = 0:8, aic = num(unname(f$aic)),
                                         chosen = as.integer(0:8 == f$order))
}
write.csv(do.call(rbind, rows), file.path(out, "ar_aic.csv"), row.names = FALSE, quote = FALSE)

# Regression with AR(1) (coefficient 0.7, unit innovations: variance 1/0.51) plus
# white noise of the same variance, i.e. ARMA(1,1) with half the variance white.
n <- 300
tt <- 0:(n - 1)
x_trend <- 2 * tt / (n - 1) - 1
x_block <- as.numeric((tt %% 30) >= 5 & (tt %% 30) < 20)
x_rand <- signif(rnorm(n), 12)
e <- as.numeric(arima.sim(list(ar = 0.7), n = n, n.start = 200)) + rnorm(n, sd = sqrt(1 / 0.51))
y <- signif(50 + 2 * x_trend + 1.5 * x_block + 0.5 * x_rand + e, 12)
d <- data.frame(y = y, x_intercept = 1, x_trend = x_trend, x_block = x_block, x_rand = x_rand)
write.csv(data.frame(y = num(d$y), x_intercept = num(d$x_intercept), x_trend = num(d$x_trend),
                     x_block = num(d$x_block), x_rand = num(d$x_rand)),
          file.path(out, "arma_input.csv"), row.names = FALSE, quote = FALSE)
ctl <- glsControl(maxIter = 200, msMaxIter = 500, tolerance = 1e-10, msTol = 1e-12)
fits <- lapply(list(c(0, 0), c(0.5, -0.3), c(0.9, -0.6)), function(v)
  gls(y ~ 0 + x_intercept + x_trend + x_block + x_rand, data = d,
      correlation = corARMA(value = v, p = 1, q = 1), method = "REML", control = ctl))
best <- fits[[which.max(sapply(fits, logLik))]]
cs <- coef(best$modelStruct$corStruct, unconstrained = FALSE)
write.csv(data.frame(phi = num(unname(cs[1])), theta = num(unname(cs[2])),
                     loglik = num(as.numeric(logLik(best))), sigma = num(best$sigma)),
          file.path(out, "arma_reml.csv"), row.names = FALSE, quote = FALSE)
tab <- summary(best)$tTable
write.csv(data.frame(term = rownames(tab), estimate = num(tab[, "Value"]), std_error = num(tab[, "Std.Error"])),
          file.path(out, "arma_reml_coef.csv"), row.names = FALSE, quote = FALSE)

# pt.csv: two-sided Student t p-values 2*pt(-abs(t), df); qt.csv: qt(0.975, df). Base R stats.
# Usage: Rscript pt.R [OUTDIR]
here <- local({
  f <- sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))
  dirname(normalizePath(f[1]))
})
args <- commandArgs(TRUE)
out <- if (length(args) >= 1) args[1] else here
dir.create(out, showWarnings = FALSE, recursive = TRUE)
num <- function(x) sprintf("%.17g", x)

tv <- c(0.5, 1, 1.96, 2.5, 4, 8)
dfs <- c(1, 3, 10, 20, 50, 137, 1000)
g <- expand.grid(df = dfs, t = tv)  # t outer, df inner
p <- 2 * pt(-abs(g$t), g$df)
write.csv(data.frame(t = num(g$t), df = num(g$df), p_two_sided = num(p)),
          file.path(out, "pt.csv"), row.names = FALSE, quote = FALSE)

qdf <- c(1, 10, 20, 100, 1e6)
write.csv(data.frame(df = num(qdf), q975 = num(qt(0.975, qdf))),
          file.path(out, "qt.csv"), row.names = FALSE, quote = FALSE)

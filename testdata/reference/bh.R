# bh_input.csv: 25 p-values drawn here; bh.csv: p.adjust(p, method = "BH"), input order.
# Usage: Rscript bh.R [OUTDIR]
here <- local({
  f <- sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))
  dirname(normalizePath(f[1]))
})
args <- commandArgs(TRUE)
out <- if (length(args) >= 1) args[1] else here
dir.create(out, showWarnings = FALSE, recursive = TRUE)
num <- function(x) sprintf("%.17g", x)

RNGkind("Mersenne-Twister", "Inversion", "Rejection")
set.seed(20261201)
tiny <- 10^(-runif(8, 3, 8))         # 8 small p-values in [1e-8, 1e-3]
unif <- runif(14)                    # 14 uniform p-values
p <- c(tiny, tiny[3], unif, unif[5], 1)  # two exact ties and an exact 1: 25 values
p <- p[sample.int(length(p))]
stopifnot(length(p) == 25, sum(duplicated(p)) == 2, any(p == 1))

write.csv(data.frame(p = num(p)), file.path(out, "bh_input.csv"), row.names = FALSE, quote = FALSE)
write.csv(data.frame(p = num(p), q_bh = num(p.adjust(p, method = "BH"))),
          file.path(out, "bh.csv"), row.names = FALSE, quote = FALSE)

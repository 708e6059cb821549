# pbeta.R: reference values of the regularized incomplete beta function for
# stats/incbeta_test.go.
#
# Run from the repository root (make.R also sources it):
#
#     Rscript testdata/reference/pbeta.R
#
# Written and run with R 4.2.2 (Debian's r-base-core), base R only. It writes
#   testdata/reference/pbeta.csv   header `a,b,x,p,q` with
#                                  p = pbeta(x, a, b) = I_x(a, b) and
#                                  q = pbeta(x, a, b, lower.tail = FALSE),
# every value with sprintf("%.17g"), which round-trips doubles exactly.
#
# Grid: a and b each in {0.5, 1, 2.5, 10, 100, 5000, 50000, 500000}, and for
# every pair x at
#   - the lower-tail points qbeta(t, a, b) and the upper-tail points
#     1 - qbeta(t, b, a) for t in 1e-300 ... 0.5 (so that p or q is near t
#     where qbeta can reach it), the quantile rounded to 8 significant digits
#     (for the upper points the distance 1 - x is rounded; for x >= 1/2 the
#     difference 1 - x of the stored x is exact, as R and the Go test form it);
#   - the fixed points 1e-100, 1e-10, 0.001, 0.1, 0.25, 0.5, 0.75, 0.9, 0.999.
# Rows with x outside (0, 1) (quantiles that round to 0 or 1) or with p or q
# below the smallest normal double, 2^-1022 (about 2.2e-308), are dropped, and
# duplicates are removed. The x written is the double R evaluated at, so R
# and the Go tests see the same argument.
#
# Accuracy of the references: R's pbeta is TOMS 708 (DiDonato & Morris 1992),
# whose series and continued fractions stop at a relative change of 1e-15;
# away from the far tails it is good to a few 1e-15 relative. Two rounding
# errors grow beyond that (measured against a 60-digit evaluation): the
# exponent ln p of a tiny result (down to about -690) carries an absolute
# rounding error, about 1e-13 relative near p = 1e-300; and bratio forms
# lambda = a - (a+b)*x in plain double arithmetic, which costs up to
# 2.2e-16*|lambda| relative: 1.5e-12 at a = b = 5e5, x = 0.517. Below about
# 1e-300 R can be much worse (its pf is off by 1.4e-7 at p = 1e-305 with
# df1 = 13, df2 = 1e5). stats/incbeta_test.go sets its tolerance from this.

if (!file.exists("go.mod") || !dir.exists("testdata/reference")) {
  stop("run this from the repository root: Rscript testdata/reference/pbeta.R")
}

fmt <- function(x) sprintf("%.17g", as.numeric(x))

params <- c(0.5, 1, 2.5, 10, 100, 5000, 50000, 500000)
targets <- c(1e-300, 1e-250, 1e-200, 1e-150, 1e-100, 1e-60, 1e-30, 1e-15,
             1e-8, 1e-4, 0.01, 0.1, 0.3, 0.5)
fixed <- c(1e-100, 1e-10, 0.001, 0.1, 0.25, 0.5, 0.75, 0.9, 0.999)

lines <- character()
for (a in params) {
  for (b in params) {
    lower <- suppressWarnings(signif(qbeta(targets, a, b), 8))
    upper <- 1 - suppressWarnings(signif(qbeta(targets, b, a), 8))
    xs <- sort(unique(c(lower, upper, fixed)))
    xs <- xs[is.finite(xs) & xs > 0 & xs < 1]
    p <- pbeta(xs, a, b)
    q <- pbeta(xs, a, b, lower.tail = FALSE)
    keep <- p >= 2^-1022 & q >= 2^-1022
    lines <- c(lines, paste(fmt(a), fmt(b), fmt(xs[keep]), fmt(p[keep]), fmt(q[keep]), sep = ","))
  }
}

path <- file.path("testdata", "reference", "pbeta.csv")
con <- file(path, open = "w")
writeLines(c("a,b,x,p,q", lines), con)
close(con)
message("wrote ", length(lines), " rows to ", path, " with ", R.version.string)

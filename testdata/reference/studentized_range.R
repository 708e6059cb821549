# studentized_range.R: reference values of the studentized range distribution
# from R's ptukey and qtukey, for the tests of stats/studentized.go.
#
# Makes testdata/reference/studentized_range.csv with the columns
#   kind,k,df,x,value
# where kind is
#   cdf       value = ptukey(x, k, df)                      (x = q)
#   sf        value = ptukey(x, k, df, lower.tail = FALSE)  (x = q)
#   quantile  value = qtukey(x, k, df)                      (x = p)
# Numbers are printed with sprintf("%.17g"); df = Inf is printed as Inf.
#
# Written for and run with R 4.2.2 (Debian package r-base-core); the R
# version that made the file is recorded in its first line. Run from the
# repository root:
#
#   Rscript testdata/reference/studentized_range.R
#
# Grid: k in {2, 3, 4, 5, 6, 8, 10, 16, 20, 50, 100}; df in {2, 2.5, 3, 5,
# 7.3, 10, 20, 60, 120, 1000, 1e5, Inf} (ptukey returns NaN for df < 2, so
# df = 1 is not included). For each (k, df) the q values are placed near
# the quantiles of probability 0.001, 0.01, 0.1, 0.5, 0.9, 0.99 and 0.999,
# found with uniroot on ptukey, and, for upper tails 1e-4, 1e-5 and 1e-7,
# at the pairwise (Bonferroni) bound sqrt(2) * qt(1 - a/(k(k-1)), df), where
# the upper tail is just below a. Each q is rounded to 4 significant digits,
# so the grid points are exact decimals; they only place the points, the
# reference values are ptukey at them. Note: R documents ptukey and qtukey
# as of limited accuracy, and for df > 25000 ptukey uses the df = Inf
# formula.

ks <- c(2, 3, 4, 5, 6, 8, 10, 16, 20, 50, 100)
dfs <- c(2, 2.5, 3, 5, 7.3, 10, 20, 60, 120, 1000, 1e5, Inf)
lower_ps <- c(0.001, 0.01, 0.1, 0.5, 0.9, 0.99, 0.999)
upper_as <- c(1e-4, 1e-5, 1e-7)
quantile_ps <- c(0.5, 0.9, 0.95, 0.99, 0.999)

fmt <- function(v) ifelse(is.infinite(v), ifelse(v > 0, "Inf", "-Inf"), sprintf("%.17g", v))

grid_q <- function(k, df) {
  qs <- numeric(0)
  for (p in lower_ps) {
    r <- uniroot(function(lq) ptukey(exp(lq), k, df) - p,
                 c(log(1e-4), log(1e4)), tol = 1e-10)
    qs <- c(qs, exp(r$root))
  }
  for (a in upper_as) {
    qs <- c(qs, sqrt(2) * qt(1 - a / (k * (k - 1)), df))
  }
  unique(signif(qs, 4))
}

out <- file("testdata/reference/studentized_range.csv", "w")
writeLines(paste0("# made by testdata/reference/studentized_range.R with ",
                  R.version.string), out)
writeLines("kind,k,df,x,value", out)
for (k in ks) {
  for (df in dfs) {
    for (q in grid_q(k, df)) {
      writeLines(paste("cdf", k, fmt(df), fmt(q), fmt(ptukey(q, k, df)), sep = ","), out)
      writeLines(paste("sf", k, fmt(df), fmt(q),
                       fmt(ptukey(q, k, df, lower.tail = FALSE)), sep = ","), out)
    }
    for (p in quantile_ps) {
      writeLines(paste("quantile", k, fmt(df), fmt(p), fmt(qtukey(p, k, df)), sep = ","), out)
    }
  }
}
close(out)

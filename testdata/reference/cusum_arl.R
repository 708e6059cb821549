# cusum_arl.R: average run lengths of the two-sided tabular CUSUM, for
# alert/cusum_test.go.
#
# Run from the repository root (make.R also sources it):
#
#     Rscript testdata/reference/cusum_arl.R
#
# Written and run with R 4.2.2 and the spc package 0.6.7 (Debian's
# r-base-core and r-cran-spc; install with apt-get install -y r-cran-spc).
# spc::xcusum.arl computes the ARL of the chart S = max(0, S + X - k),
# signalling when S > h, for N(mu, 1) observations, by the Gauss-Legendre
# Nystroem solution of its integral equation (Knoth); sided = "two" is the
# two-sided chart of an upper and a lower CUSUM. It writes
#   testdata/reference/cusum_arl.csv   header `k,h,shift,arl`
# for k in 0.25, 0.5, 0.85, h in 4, 5, 8 and shifts 0, 0.5, 1, 2 (in SDs),
# every value with sprintf("%.17g").
suppressMessages(library(spc))
rows <- character()
for (k in c(0.25, 0.5, 0.85)) for (h in c(4, 5, 8)) for (mu in c(0, 0.5, 1, 2)) {
  a <- xcusum.arl(k, h, mu, sided = "two")
  rows <- c(rows, sprintf("%.17g,%.17g,%.17g,%.17g", k, h, mu, a))
}
writeLines(c("k,h,shift,arl", rows), "testdata/reference/cusum_arl.csv")

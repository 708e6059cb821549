# quantile7.R: reference quartiles for cmd/lockstep/quantiles_test.go (the
# box plots of the live report).
#
# Run from the repository root (make.R also sources it):
#
#     Rscript testdata/reference/quantile7.R
#
# Written and run with R 4.2.2 (Debian's r-base-core), base R only. It reads
# testdata/scenarios/fill_weight.csv and writes
#   testdata/reference/quantile7.csv   header `group,p,value` with
#                                      value = quantile(x, p, type = 7)
# for each group's values x and p in 0, 0.25, 0.5, 0.75, 1, and for the
# small samples named "n1" (the first value of L1), "n2" (the first two) and
# "n5" (the first five), every value with sprintf("%.17g").
d <- read.csv("testdata/scenarios/fill_weight.csv", colClasses = c("character", "numeric"))
ps <- c(0, 0.25, 0.5, 0.75, 1)
sets <- split(d$value, d$group)
l1 <- d$value[d$group == "L1"]
sets[["n1"]] <- l1[1]
sets[["n2"]] <- l1[1:2]
sets[["n5"]] <- l1[1:5]
rows <- character(0)
for (g in names(sets)) {
  q <- quantile(sets[[g]], ps, type = 7, names = FALSE)
  rows <- c(rows, sprintf("%s,%s,%.17g", g, ps, q))
}
writeLines(c("group,p,value", rows), "testdata/reference/quantile7.csv")

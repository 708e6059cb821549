# make.R: scenario data and reference values for lockstep's stats package.
#
# Run from the repository root:
#
#     Rscript testdata/reference/make.R
#
# Written and run with R 4.2.2 (Debian's r-base-core); it uses base R and the
# stats package that comes with it, nothing from CRAN.
#
# It makes:
#   testdata/scenarios/NAME.csv      scenario data sets (header `group,value`),
#                                    drawn with set.seed and rounded to the
#                                    resolution of the instrument
#   testdata/reference/oneway.csv    reference values per scenario, long format
#                                    `scenario,quantity,a,b,value`
#   testdata/reference/pf_tail.csv   upper tail of the central F down to 1e-305
#   testdata/reference/pf_noncentral.csv  upper tail of the noncentral F
#   testdata/reference/qf.csv        lower-tail quantiles of the central F
#                                    (qbeta-based; see accurate_qf below)
#   testdata/reference/pchisq_tail.csv    upper tail of the chi-square
# and then sources every other *.R file in testdata/reference/, so that this
# one command regenerates all reference data.
#
# The scenario data are invented plant measurements; every reference value is
# computed by R from the data as written to the CSV files (the files are read
# back before anything is computed, so R and the Go tests see the same
# numbers). Values are written with sprintf("%.17g"), which round-trips
# doubles exactly.
#
# Quantities in oneway.csv (a, b empty unless stated):
#   one-way table, anova(lm(value ~ group)) and summary(lm):
#     ss_between ss_within ss_total df_between df_within ms_between ms_within
#     f p r2 adj_r2 omega2 residual_sd
#     (ss_total is sum((x - mean(x))^2); omega2 = (SSB - (k-1) MSW)/(SST + MSW))
#   Welch, oneway.test(var.equal = FALSE):  welch_f welch_df1 welch_df2 welch_p
#   Bartlett, bartlett.test:   bartlett_statistic bartlett_df bartlett_p
#   Levene (mean-centred) and Brown-Forsythe (median-centred), as the one-way
#     F on absolute deviations (car::leveneTest is not part of r-base-core, so
#     they are computed in base R the way car does it):
#     levene_f levene_df1 levene_df2 levene_p
#     brown_forsythe_f brown_forsythe_df1 brown_forsythe_df2 brown_forsythe_p
#   Kruskal-Wallis, kruskal.test:  kruskal_wallis_h kruskal_wallis_df kruskal_wallis_p
#   per group (a = group): n mean sd
#   per pair (a, b in first-appearance order, diff = mean(b) - mean(a)):
#     tukey_diff tukey_lwr tukey_upr tukey_p   TukeyHSD, conf.level = 0.95
#     games_howell_df games_howell_p           Games & Howell (1976); R's
#       ptukey is NaN for df < 2, and such values are written as NA
#   analysis of means at alpha = 0.05 (a = group): anom_deviation anom_halfwidth
#   minimum detectable shift at alpha = 0.05, power 0.9 (a = group): mds
#   nozzle_flow only: t_pooled, t.test(var.equal = TRUE) of the first group
#     against the second
#
# Accuracy of the references themselves: R's noncentral pf (pnbeta, AS 226 /
# AS R84) stops its series at an absolute error bound of 1e-9 and forms the
# upper tail as 1 - lower tail, so pf_noncentral.csv and mds are good to about
# 1e-9 absolute in p; everything else is good to about 1e-14 relative.

if (!file.exists("go.mod") || !dir.exists("testdata/reference")) {
  stop("run this from the repository root: Rscript testdata/reference/make.R")
}

scen_dir <- "testdata/scenarios"
ref_dir <- "testdata/reference"
dir.create(scen_dir, showWarnings = FALSE, recursive = TRUE)

fmt <- function(x) ifelse(is.na(x), "NA", sprintf("%.17g", as.numeric(x)))

write_csv_lines <- function(path, header, lines) {
  con <- file(path, open = "w")
  on.exit(close(con))
  writeLines(c(header, lines), con)
}

# ---------------------------------------------------------------------------
# Scenarios.

# make_scenario draws n[i] values for group groups[i] from a normal with the
# given mean and SD, rounds them to `digits` decimals (the resolution of the
# instrument) and writes them in the row order `rows`:
#   "blocks"      all of group 1, then group 2, ...
#   "roundrobin"  one value of each group in turn (as a rotary machine presents them)
#   "time"        shuffled, as a log in time order interleaves the groups
make_scenario <- function(name, seed, groups, n, mean, sd, digits, rows = "blocks") {
  set.seed(seed)
  g <- rep(groups, n)
  x <- unlist(lapply(seq_along(groups), function(i) rnorm(n[i], mean[i], sd[i])))
  x <- round(x, digits)
  idx <- switch(rows,
    blocks = seq_along(x),
    roundrobin = order(unlist(lapply(n, seq_len)), match(g, groups)),
    time = sample(seq_along(x)),
    stop("unknown row order ", rows))
  lines <- sprintf("%s,%.*f", g[idx], digits, x[idx])
  write_csv_lines(file.path(scen_dir, paste0(name, ".csv")), "group,value", lines)
}

# Four filling lines of 500 g coffee bags, checkweigher at 0.01 g, filled to a
# 500.6 g target; line L3 runs about 1.2 g heavy. Logged in time order.
make_scenario("fill_weight", 5101,
  groups = c("L1", "L2", "L3", "L4"), n = c(30, 28, 31, 25),
  mean = c(500.6, 500.5, 501.8, 500.7), sd = c(0.8, 0.85, 0.75, 0.8),
  digits = 2, rows = "time")

# Six sealing jaws at about 182 degC, thermocouple read at 0.1 degC; jaw J4 has
# a loose heater cartridge and about three times the spread of the others.
make_scenario("seal_temperature", 5102,
  groups = paste0("J", 1:6), n = rep(20, 6),
  mean = c(182.1, 181.9, 182.0, 182.2, 182.0, 181.8),
  sd = c(0.5, 0.55, 0.5, 1.1, 0.45, 0.5),
  digits = 1)

# Eight capping heads of a rotary capper, removal torque in N m at 0.01; all
# heads agree. Rows in the order the turret presents the heads.
make_scenario("cap_torque", 5103,
  groups = paste0("H", 1:8), n = rep(15, 8),
  mean = rep(2.10, 8), sd = rep(0.05, 8),
  digits = 2, rows = "roundrobin")

# Three mould cavities, wall thickness near 1.8 mm read by a gauge at 0.1 mm,
# so most values fall on 1.7, 1.8 or 1.9 (many ties); cavity C2 runs a little
# thick.
make_scenario("wall_thickness", 5104,
  groups = c("C1", "C2", "C3"), n = c(12, 14, 10),
  mean = c(1.80, 1.85, 1.79), sd = c(0.07, 0.07, 0.08),
  digits = 1)

# Two dosing nozzles, flow in mL/min at 0.1 mL/min; N2 about 1.5 mL/min low.
make_scenario("nozzle_flow", 5105,
  groups = c("N1", "N2"), n = c(16, 14),
  mean = c(250.0, 248.5), sd = c(1.8, 2.0),
  digits = 1)

# Three pilot reactors, batch yield in % at 0.01, only 2, 3 and 2 batches
# each, in run order (R2 ran first), with unequal spreads: Welch's and the
# Games-Howell degrees of freedom become small, some below 2.
make_scenario("small_df", 5106,
  groups = c("R2", "R1", "R3"), n = c(2, 3, 2),
  mean = c(92.4, 92.9, 91.8), sd = c(0.3, 0.5, 1.4),
  digits = 2)

scenarios <- c("fill_weight", "seal_temperature", "cap_torque",
               "wall_thickness", "nozzle_flow", "small_df")

# ---------------------------------------------------------------------------
# Reference values per scenario.

rows <- list()
add <- function(scenario, quantity, value, a = "", b = "") {
  rows[[length(rows) + 1]] <<- data.frame(scenario = scenario, quantity = quantity,
    a = a, b = b, value = fmt(value), stringsAsFactors = FALSE)
}

# Absolute deviations from a per-group centre, and the one-way F on them.
abs_dev_anova <- function(d, centre) {
  z <- abs(d$value - ave(d$value, d$g, FUN = centre))
  tab <- anova(lm(z ~ d$g))
  list(f = tab[1, "F value"], df1 = tab[1, "Df"], df2 = tab[2, "Df"], p = tab[1, "Pr(>F)"])
}

for (s in scenarios) {
  d <- read.csv(file.path(scen_dir, paste0(s, ".csv")),
                colClasses = c("character", "numeric"))
  lev <- unique(d$group)                 # first-appearance order
  d$g <- factor(d$group, levels = lev)
  k <- length(lev)
  N <- nrow(d)
  ni <- as.numeric(table(d$g)[lev])
  mi <- as.numeric(tapply(d$value, d$g, mean)[lev])
  vi <- as.numeric(tapply(d$value, d$g, var)[lev])
  stopifnot(all(vi > 0))

  # One-way table.
  fit <- lm(value ~ g, data = d)
  tab <- anova(fit)
  sm <- summary(fit)
  ssb <- tab["g", "Sum Sq"]; ssw <- tab["Residuals", "Sum Sq"]
  sst <- sum((d$value - mean(d$value))^2)
  dfb <- tab["g", "Df"]; dfw <- tab["Residuals", "Df"]
  msb <- tab["g", "Mean Sq"]; msw <- tab["Residuals", "Mean Sq"]
  # Cross-check the table against the direct sums (catches a mapping slip).
  stopifnot(isTRUE(all.equal(ssb, sum(ni * (mi - mean(d$value))^2), tolerance = 1e-10)),
            isTRUE(all.equal(ssw, sum((ni - 1) * vi), tolerance = 1e-10)),
            isTRUE(all.equal(sst, ssb + ssw, tolerance = 1e-10)))
  add(s, "ss_between", ssb)
  add(s, "ss_within", ssw)
  add(s, "ss_total", sst)
  add(s, "df_between", dfb)
  add(s, "df_within", dfw)
  add(s, "ms_between", msb)
  add(s, "ms_within", msw)
  add(s, "f", tab["g", "F value"])
  add(s, "p", tab["g", "Pr(>F)"])
  add(s, "r2", sm$r.squared)
  add(s, "adj_r2", sm$adj.r.squared)
  add(s, "omega2", (ssb - dfb * msw) / (sst + msw))
  add(s, "residual_sd", sm$sigma)

  # Welch.
  w <- oneway.test(value ~ g, data = d, var.equal = FALSE)
  add(s, "welch_f", w$statistic)
  add(s, "welch_df1", w$parameter[1])
  add(s, "welch_df2", w$parameter[2])
  add(s, "welch_p", w$p.value)

  # Bartlett.
  bt <- bartlett.test(value ~ g, data = d)
  add(s, "bartlett_statistic", bt$statistic)
  add(s, "bartlett_df", bt$parameter)
  add(s, "bartlett_p", bt$p.value)

  # Levene (mean) and Brown-Forsythe (median).
  lv <- abs_dev_anova(d, mean)
  add(s, "levene_f", lv$f); add(s, "levene_df1", lv$df1)
  add(s, "levene_df2", lv$df2); add(s, "levene_p", lv$p)
  bf <- abs_dev_anova(d, median)
  add(s, "brown_forsythe_f", bf$f); add(s, "brown_forsythe_df1", bf$df1)
  add(s, "brown_forsythe_df2", bf$df2); add(s, "brown_forsythe_p", bf$p)

  # Kruskal-Wallis.
  kw <- kruskal.test(value ~ g, data = d)
  add(s, "kruskal_wallis_h", kw$statistic)
  add(s, "kruskal_wallis_df", kw$parameter)
  add(s, "kruskal_wallis_p", kw$p.value)

  # Per group.
  for (i in seq_len(k)) {
    add(s, "n", ni[i], a = lev[i])
    add(s, "mean", mi[i], a = lev[i])
    add(s, "sd", sqrt(vi[i]), a = lev[i])
  }

  # Per pair. TukeyHSD names the row for levels i < j "lev_j-lev_i" and
  # reports mean(lev_j) - mean(lev_i); with the levels in first-appearance
  # order that is mean(b) - mean(a) for the pair (a, b) = (lev_i, lev_j).
  th <- TukeyHSD(aov(value ~ g, data = d), "g", conf.level = 0.95)$g
  for (i in seq_len(k - 1)) {
    for (j in (i + 1):k) {
      a <- lev[i]; b <- lev[j]
      row <- th[paste(b, a, sep = "-"), ]
      stopifnot(isTRUE(all.equal(unname(row["diff"]), mi[j] - mi[i], tolerance = 1e-9)))
      add(s, "tukey_diff", row["diff"], a, b)
      add(s, "tukey_lwr", row["lwr"], a, b)
      add(s, "tukey_upr", row["upr"], a, b)
      add(s, "tukey_p", row["p adj"], a, b)

      ua <- vi[i] / ni[i]; ub <- vi[j] / ni[j]
      ghdf <- (ua + ub)^2 / (ua^2 / (ni[i] - 1) + ub^2 / (ni[j] - 1))
      q <- abs(mi[j] - mi[i]) / sqrt((ua + ub) / 2)
      ghp <- suppressWarnings(ptukey(q, k, ghdf, lower.tail = FALSE))
      add(s, "games_howell_df", ghdf, a, b)
      add(s, "games_howell_p", ghp, a, b)   # NA (NaN) when ghdf < 2
    }
  }

  # Analysis of means, alpha = 0.05, Sidak-adjusted t limits.
  alpha <- 0.05
  alpha_star <- 1 - (1 - alpha)^(1 / k)
  h <- qt(1 - alpha_star / 2, N - k)
  sres <- sqrt(msw)
  for (i in seq_len(k)) {
    add(s, "anom_deviation", mi[i] - mean(d$value), a = lev[i])
    add(s, "anom_halfwidth", h * sres * sqrt((N - ni[i]) / (N * ni[i])), a = lev[i])
  }

  # Minimum detectable shift of one group alone, alpha = 0.05, power 0.9.
  crit <- qf(0.95, k - 1, N - k)
  for (i in seq_len(k)) {
    pow <- function(delta) {
      lambda <- delta^2 * ni[i] * (N - ni[i]) / N / sres^2
      pf(crit, k - 1, N - k, ncp = lambda, lower.tail = FALSE) - 0.9
    }
    hi <- sres
    while (pow(hi) < 0) hi <- 2 * hi
    add(s, "mds", uniroot(pow, c(0, hi), tol = 1e-12, maxiter = 1000)$root, a = lev[i])
  }

  if (s == "nozzle_flow") {
    tt <- t.test(d$value[d$g == lev[1]], d$value[d$g == lev[2]], var.equal = TRUE)
    add(s, "t_pooled", tt$statistic)
  }
}

ref <- do.call(rbind, rows)
write_csv_lines(file.path(ref_dir, "oneway.csv"), "scenario,quantity,a,b,value",
  paste(ref$scenario, ref$quantity, ref$a, ref$b, ref$value, sep = ","))

# ---------------------------------------------------------------------------
# Distribution functions.

# upper_f returns an f (rounded to 8 significant digits) whose upper F tail is
# near the target p. qf fails far out for some degrees of freedom (its log
# scale underflows), so then the point is found by root finding on log p.
upper_f <- function(p, d1, d2) {
  ok <- function(f) {
    if (!is.finite(f) || f <= 0) return(FALSE)
    pf0 <- pf(f, d1, d2, lower.tail = FALSE)
    pf0 > 0 && abs(log(pf0) - log(p)) < 1e-3 * max(1, abs(log(p)))
  }
  f <- suppressWarnings(qf(p, d1, d2, lower.tail = FALSE))
  if (!ok(f)) {
    g <- function(lf) log(max(pf(exp(lf), d1, d2, lower.tail = FALSE), 1e-320)) - log(p)
    f <- exp(uniroot(g, c(-30, 705), tol = 1e-10)$root)
  }
  signif(f, 8)
}

tail_p <- c(0.99, 0.9, 0.5, 0.05, 1e-3, 1e-8, 1e-16, 1e-30, 1e-60, 1e-100,
            1e-150, 1e-200, 1e-250, 1e-300, 1e-305)
lines <- character()
for (d1 in c(1, 2, 3, 5, 8, 13, 20, 50)) {
  for (d2 in c(2, 2.5, 3, 5, 10, 17.37, 25, 60, 200, 1000, 10000, 100000)) {
    for (p in tail_p) {
      f <- upper_f(p, d1, d2)
      pv <- pf(f, d1, d2, lower.tail = FALSE)
      if (pv > 0) lines <- c(lines, paste(fmt(f), fmt(d1), fmt(d2), fmt(pv), sep = ","))
    }
  }
}
write_csv_lines(file.path(ref_dir, "pf_tail.csv"), "f,df1,df2,p", lines)

lines <- character()
for (d1 in c(1, 2, 3, 5, 7)) {
  for (d2 in c(2, 5, 12, 30, 100, 1000)) {
    for (ncp in c(0.5, 2, 5, 10, 20, 50, 100, 200)) {
      fs <- c(qf(0.95, d1, d2), sapply(c(0.05, 0.5, 0.95), function(q) qf(q, d1, d2, ncp = ncp)))
      for (f in signif(fs, 7)) {
        pv <- pf(f, d1, d2, ncp = ncp, lower.tail = FALSE)
        lines <- c(lines, paste(fmt(f), fmt(d1), fmt(d2), fmt(ncp), fmt(pv), sep = ","))
      }
    }
  }
}
write_csv_lines(file.path(ref_dir, "pf_noncentral.csv"), "f,df1,df2,ncp,p", lines)

# qf(p, d1, d2) is (1/qbeta(p, d2/2, d1/2, lower.tail = FALSE) - 1) * d2/d1,
# which cancels when that beta quantile is near 1, i.e. for small quantiles
# (at p = 0.001, df = (1, 10) it is off by 4e-10 relative). There the quantile
# is taken from the other beta, y = qbeta(p, d1/2, d2/2), as d2/d1 * y/(1 - y).
accurate_qf <- function(p, d1, d2) {
  y <- qbeta(p, d1 / 2, d2 / 2)
  f <- if (y < 0.5) d2 / d1 * y / (1 - y) else qf(p, d1, d2)
  stopifnot(isTRUE(all.equal(f, qf(p, d1, d2), tolerance = 1e-8)))
  f
}
lines <- character()
for (dd in list(c(1, 2), c(1, 10), c(2, 5), c(3, 27), c(5, 100), c(7, 112), c(4, 10000), c(12.5, 3.7))) {
  for (p in c(0.001, 0.1, 0.5, 0.9, 0.95, 0.99, 0.999)) {
    lines <- c(lines, paste(fmt(p), fmt(dd[1]), fmt(dd[2]), fmt(accurate_qf(p, dd[1], dd[2])), sep = ","))
  }
}
write_csv_lines(file.path(ref_dir, "qf.csv"), "p,df1,df2,f", lines)

lines <- character()
for (df in c(1, 2, 3, 5, 7, 10, 20, 50, 100)) {
  for (p in c(0.99, 0.5, 0.05, 1e-5, 1e-20, 1e-100, 1e-300)) {
    x <- signif(qchisq(p, df, lower.tail = FALSE), 8)
    lines <- c(lines, paste(fmt(x), fmt(df), fmt(pchisq(x, df, lower.tail = FALSE)), sep = ","))
  }
}
write_csv_lines(file.path(ref_dir, "pchisq_tail.csv"), "x,df,p", lines)

# ---------------------------------------------------------------------------
# Every other script in this folder (e.g. studentized_range.R).

others <- setdiff(sort(list.files(ref_dir, pattern = "\\.R$", full.names = TRUE)),
                  file.path(ref_dir, "make.R"))
for (f in others) {
  message("sourcing ", f)
  source(f, local = new.env())
}

message("reference data written with ", R.version.string)

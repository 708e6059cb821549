#!/usr/bin/python3
"""Reference values of the studentized range distribution from SciPy.

Makes testdata/reference/studentized_range_scipy.csv, a second source
for the tests of stats/studentized.go beside the R values of
studentized_range.R. SciPy's scipy.stats.studentized_range integrates the
same double integral with QUADPACK (nquad) to a much smaller tolerance
than R's ptukey, and accepts df < 2.

Columns: kind,k,df,x,value where kind is
  cdf       value = studentized_range.cdf(x, k, df)   (x = q)
  sf        value = studentized_range.sf(x, k, df)    (x = q)
  quantile  value = studentized_range.ppf(x, k, df)   (x = p)
Numbers are printed with "%.17g"; df = inf is printed as Inf.

Written for and run with SciPy 1.10.1 (Debian package python3-scipy) and
the system Python 3.11; the versions that made the file are recorded in
its first line. Run from the repository root (takes about ten minutes):

  /usr/bin/python3 testdata/reference/studentized_range_scipy.py

Grid: k in {2, 3, 4, 5, 6, 8, 10, 16, 20, 50, 100}; df in {1, 2, 2.5, 3,
5, 7.3, 10, 20, 60, 120, 1000, 50000, Inf} (SciPy switches to the df = inf
formula from df = 1e5 on, so 50000 is the largest finite df here). For
each (k, df) the quantiles of p in {0.001, 0.01, 0.1, 0.5, 0.9, 0.95, 0.99,
0.999, 1 - 1e-4, 1 - 1e-5} are computed with ppf; the p in {0.5, 0.9, 0.95,
0.99, 0.999} ones are written as quantile rows, and every quantile, rounded
to 10 significant digits, is a q point for the cdf and sf rows.
"""

import math
import sys

import numpy
import scipy
from scipy.stats import studentized_range

KS = [2, 3, 4, 5, 6, 8, 10, 16, 20, 50, 100]
DFS = [1, 2, 2.5, 3, 5, 7.3, 10, 20, 60, 120, 1000, 50000, math.inf]
PS = [0.001, 0.01, 0.1, 0.5, 0.9, 0.95, 0.99, 0.999, 1 - 1e-4, 1 - 1e-5]
QUANTILE_PS = [0.5, 0.9, 0.95, 0.99, 0.999]
OUT = "testdata/reference/studentized_range_scipy.csv"


def fmt(v):
    if math.isinf(v):
        return "Inf" if v > 0 else "-Inf"
    return "%.17g" % v


def main():
    with open(OUT, "w") as out:
        out.write("# made by testdata/reference/studentized_range_scipy.py with "
                  "SciPy %s, NumPy %s, Python %s\n"
                  % (scipy.__version__, numpy.__version__, sys.version.split()[0]))
        out.write("kind,k,df,x,value\n")
        for k in KS:
            for df in DFS:
                qs = []
                for p in PS:
                    q = float(studentized_range.ppf(p, k, df))
                    if p in QUANTILE_PS:
                        out.write("quantile,%d,%s,%s,%s\n" % (k, fmt(df), fmt(p), fmt(q)))
                    if math.isfinite(q) and q > 0:
                        qs.append(float("%.10g" % q))
                for q in sorted(set(qs)):
                    out.write("cdf,%d,%s,%s,%s\n" % (
                        k, fmt(df), fmt(q), fmt(float(studentized_range.cdf(q, k, df)))))
                    out.write("sf,%d,%s,%s,%s\n" % (
                        k, fmt(df), fmt(q), fmt(float(studentized_range.sf(q, k, df)))))
                out.flush()


if __name__ == "__main__":
    main()

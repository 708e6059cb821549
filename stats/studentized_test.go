package stats

import (
	"bufio"
	"fmt"
	"math"
	"math/big"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// Tests of the studentized range distribution (studentized.go).
//
// Sources of the expected values:
//   - R 4.2.2 ptukey/qtukey, from testdata/reference/studentized_range.R
//     (studentized_range.csv);
//   - SciPy 1.10.1 scipy.stats.studentized_range, from
//     testdata/reference/studentized_range_scipy.py
//     (studentized_range_scipy.csv);
//   - exact identities, stated beside each test: k = 2 reduces to Student's
//     t (gonum's distuv.StudentsT, distuv.UnitNormal), the pairwise bounds
//     on the upper tail and their limits.
//
// R's ptukey and qtukey are the least accurate of these (R's documentation
// says so); their errors were measured against the other sources, and the
// R tolerances below are set from those measurements.

var srInf = math.Inf(1)

// studentizedRef is one line of a reference CSV: kind is "cdf", "sf" or
// "quantile", x is q for cdf and sf and p for quantile.
type studentizedRef struct {
	line int
	kind string
	k    int
	df   float64
	x    float64
	want float64
}

func readStudentizedRef(t *testing.T, name string) []studentizedRef {
	t.Helper()
	path := filepath.Join("..", "testdata", "reference", name)
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("reference values: %v", err)
	}
	defer f.Close()
	var rows []studentizedRef
	sc := bufio.NewScanner(f)
	n := 0
	for sc.Scan() {
		n++
		line := sc.Text()
		if line == "" || strings.HasPrefix(line, "#") || strings.HasPrefix(line, "kind,") {
			continue
		}
		fs := strings.Split(line, ",")
		if len(fs) != 5 {
			t.Fatalf("%s:%d: %d fields", path, n, len(fs))
		}
		k, err1 := strconv.Atoi(fs[1])
		df, err2 := strconv.ParseFloat(fs[2], 64)
		x, err3 := strconv.ParseFloat(fs[3], 64)
		v, err4 := strconv.ParseFloat(fs[4], 64)
		for _, err := range []error{err1, err2, err3, err4} {
			if err != nil {
				t.Fatalf("%s:%d: %v", path, n, err)
			}
		}
		rows = append(rows, studentizedRef{n, fs[0], k, df, x, v})
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if len(rows) == 0 {
		t.Fatalf("%s: no rows", path)
	}
	return rows
}

// srRefGroup is the rows of one (k, df).
type srRefGroup struct {
	k    int
	df   float64
	rows []studentizedRef
}

func srGroupRefs(rows []studentizedRef) []srRefGroup {
	var gs []srRefGroup
	idx := map[[2]float64]int{}
	for _, r := range rows {
		key := [2]float64{float64(r.k), r.df}
		i, ok := idx[key]
		if !ok {
			i = len(gs)
			idx[key] = i
			gs = append(gs, srRefGroup{k: r.k, df: r.df})
		}
		gs[i].rows = append(gs[i].rows, r)
	}
	return gs
}

func (g srRefGroup) name() string { return fmt.Sprintf("k=%d/df=%g", g.k, g.df) }

// srRefEval evaluates the function a reference row refers to. The CDF and
// the upper tail at a point come from one evaluation of both (the
// unexported tails, which the exported functions call after checking their
// arguments), kept for the row of the other kind in the same group; this
// halves the time of the table tests. The exported wrappers themselves are exercised by the
// other tests.
type srRefEval map[[3]float64][2]float64

func (m srRefEval) eval(r studentizedRef) float64 {
	if r.kind == "quantile" {
		return StudentizedRangeQuantile(r.x, r.k, r.df)
	}
	key := [3]float64{float64(r.k), r.df, r.x}
	v, ok := m[key]
	if !ok {
		var d rangeDist
		d.init(r.k)
		v[0], v[1] = d.tails(r.x, r.df, nil)
		m[key] = v
	}
	switch r.kind {
	case "cdf":
		return v[0]
	case "sf":
		return v[1]
	}
	panic("unknown kind " + r.kind)
}

// srMaxErr collects the largest error per (kind, df) for the test log.
type srMaxErr map[string]float64

func (m srMaxErr) add(kind string, df, e float64) {
	key := fmt.Sprintf("%-8s df=%g", kind, df)
	if e > m[key] {
		m[key] = e
	}
}

func (m srMaxErr) log(t *testing.T, what string) {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		t.Logf("%s %s: %.2e", what, k, m[k])
	}
}

// srThin says which rows of group i of a reference table are checked, to
// keep the run short: a quantile costs several CDF evaluations, so by
// default the CDF and upper-tail rows of every group are checked and the
// quantile rows of every other group (alternate ones in the two tables,
// by offset); under -short one group in four, and the quantile rows of
// every other one of those.
func srThin(i, offset int) (skipGroup, skipQuantiles bool) {
	if testing.Short() {
		return i%4 != 0, (i/4+offset)%2 != 0
	}
	return false, (i+offset)%2 != 0
}

// rProbTol is the tolerance on |P − ptukey| for the CDF and the upper tail
// (R forms the upper tail as 1 − CDF, so both have the same error). The
// values beside each case are the largest differences measured over the
// grid; they are R's errors: the same points agree with SciPy to 1.4e-12
// and the k = 2 rows with the exact t identity to 1e-15.
func rProbTol(df float64) float64 {
	switch {
	case df <= 2:
		return 3e-2 // 1.29e-2 (k = 100, q = 2.281: ptukey gives 0, the CDF is 0.0129)
	case df <= 2.5:
		return 2e-2 // 8.2e-3 (k = 100)
	case df <= 3:
		return 1.2e-2 // 5.5e-3 (k = 100)
	case df <= 5:
		return 3e-3 // 1.3e-3 (k = 100)
	case df <= 7.3:
		return 4e-5 // 1.6e-5
	case df <= 10:
		return 1.5e-5 // 6.1e-6
	case df <= 1000:
		return 3e-6 // 1.3e-6 over df = 20, 60, 120, 1000
	case df <= 1e5:
		// ptukey evaluates the df = ∞ formula for df > 25 000, so this is
		// the true O(1/df) difference (4.4e-5 at k = 100); see also
		// TestStudentizedRangeLargeDF.
		return 1e-4
	}
	return 3e-6 // df = ∞: 1.4e-6
}

// rQuantileTol is the relative tolerance on |q − qtukey|, or 0 where
// qtukey is too inaccurate to be a check: for df ≤ 5 and p ≥ 0.99 its
// relative error is 0.3% to 96% (k = 100, df = 2, p = 0.999: 81.5 for
// 159.70; SciPy gives 159.7022682902). Those points are checked against
// SciPy instead. qtukey stops its secant iteration at an error of about
// 1e-4 on p, which sets the rest.
func rQuantileTol(df, p float64) float64 {
	if df <= 5 && p >= 0.99 {
		return 0
	}
	switch {
	case df <= 2:
		return 5e-2 // 2.0e-2 (p = 0.95, k = 100)
	case df <= 2.5:
		return 2e-2 // 8.2e-3
	case df <= 3:
		return 1e-2 // 2.9e-3
	case df <= 5:
		return 1e-4 // 1.9e-5
	case df <= 10:
		return 2e-3 // 9.1e-4 (p = 0.999, k = 100)
	case df <= 20:
		return 1e-5 // 2.2e-6
	case df <= 1000:
		return 5e-7 // 1.4e-7
	case df <= 1e5:
		return 2e-4 // 6.6e-5: df = ∞ formula in ptukey, as above
	}
	return 5e-7 // df = ∞: 1.2e-7
}

// TestStudentizedRangeR compares with R's ptukey and qtukey: values from
// R 4.2.2, testdata/reference/studentized_range.R.
func TestStudentizedRangeR(t *testing.T) {
	t.Parallel()
	rows := readStudentizedRef(t, "studentized_range.csv")
	var worst srMaxErr
	skipped := 0
	srRunGroups(t, rows, 0, &worst, func(t *testing.T, g srRefGroup, quantiles bool, worst srMaxErr) int {
		skip := 0
		vals := srRefEval{}
		for _, r := range g.rows {
			if r.kind == "quantile" && !quantiles {
				continue
			}
			if math.IsNaN(r.want) || r.kind == "quantile" && rQuantileTol(r.df, r.x) == 0 {
				skip++ // qtukey did not converge, or is too inaccurate here
				continue
			}
			got := vals.eval(r)
			if r.kind == "quantile" {
				tol := rQuantileTol(r.df, r.x)
				e := math.Abs(got-r.want) / r.want
				worst.add(r.kind, r.df, e)
				if !(e <= tol) {
					t.Errorf("line %d: qtukey(%g, %d, %g) = %.17g, got %.17g (rel. error %.2e > %.1e)",
						r.line, r.x, r.k, r.df, r.want, got, e, tol)
				}
				continue
			}
			e := math.Abs(got - r.want)
			worst.add(r.kind, r.df, e)
			if tol := rProbTol(r.df); !(e <= tol) {
				t.Errorf("line %d: %s(%g, %d, %g): R %.17g, got %.17g (error %.2e > %.1e)",
					r.line, r.kind, r.x, r.k, r.df, r.want, got, e, tol)
			}
		}
		return skip
	}, &skipped)
	worst.log(t, "largest difference from R")
	t.Logf("%d R rows not compared (qtukey NaN, or too inaccurate)", skipped)
}

// srRunGroups runs check on the (kind, k, df) groups of rows that srThin
// keeps, as parallel subtests, merging the largest errors into worst and
// adding up the counts check returns into count.
func srRunGroups(t *testing.T, rows []studentizedRef, offset int, worst *srMaxErr, check func(t *testing.T, g srRefGroup, quantiles bool, worst srMaxErr) int, count *int) {
	var mu sync.Mutex
	*worst = srMaxErr{}
	t.Run("groups", func(t *testing.T) {
		for i, g := range srGroupRefs(rows) {
			skip, skipQ := srThin(i, offset)
			if skip {
				continue
			}
			t.Run(g.name(), func(t *testing.T) {
				t.Parallel()
				w := srMaxErr{}
				n := check(t, g, !skipQ, w)
				mu.Lock()
				defer mu.Unlock()
				for k, v := range w {
					if v > (*worst)[k] {
						(*worst)[k] = v
					}
				}
				*count += n
			})
		}
	})
}

// scipyProbTol is the absolute tolerance against SciPy's cdf and sf. SciPy
// integrates with QUADPACK to an absolute accuracy of about 1e-12; the
// largest differences measured are given beside each case. They are
// SciPy's: rerunning this package with a 1e4 times tighter quadrature
// tolerance, 1e5 times smaller truncation, a 0.6 times finer lattice and no
// Chebyshev proxies changes no value by more than 1e-14, and at the k = 2
// points SciPy is the one that is off the exact t identity (df = 10,
// q = 0.98968: 1.8e-13 against 1e-15). At large df SciPy's error grows: at df = 5e4 its
// value is off the 1/df scaling that the values at 1e5, 2e5 and ∞ follow.
func scipyProbTol(df float64) float64 {
	switch {
	case df <= 1000:
		return 5e-12 // 1.4e-12 (df = 2.5); 5.5e-13 at df = 1000
	case df <= 5e4:
		return 1e-10 // 4.2e-11
	}
	return 5e-14 // df = ∞: 9.8e-15
}

// scipyQuantileTol is the relative tolerance against SciPy's ppf.
func scipyQuantileTol(df float64) float64 {
	switch {
	case df <= 120:
		return 3e-12 // 9.7e-13
	case df <= 1000:
		return 1e-10 // 3.8e-11
	case df <= 5e4:
		return 1e-8 // 3.1e-9
	}
	return 1e-13 // df = ∞: 1.8e-14
}

// srPairSlack is the relative accuracy of srPairBounds: gonum's incomplete
// beta function, behind distuv.StudentsT, is accurate to about 1e-14 up to
// df = 100 but only to 3e-13 at df = 1000 and 3e-11 at df = 5e4 (measured
// against R's pt).
func srPairSlack(df float64) float64 {
	if df <= 100 || math.IsInf(df, 1) {
		return 1e-12
	}
	return 1e-10
}

// srPairBounds returns the bounds on the upper tail
//
//	P(|T| > q/√2) ≤ P(Q > q) ≤ k(k−1)/2 · P(|T| > q/√2),   T ~ t_df,
//
// which hold because the range is at least |Z_1 − Z_2| and by the union
// bound over the k(k−1)/2 pairs (Z_i − Z_j)/(√2 s) ~ t_df.
func srPairBounds(q float64, k int, df float64) (lo, hi float64) {
	x := q / math.Sqrt2
	if math.IsInf(df, 1) {
		lo = math.Erfc(x / math.Sqrt2)
	} else {
		lo = 2 * distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}.Survival(x)
	}
	return lo, math.Min(1, float64(k*(k-1))/2*lo)
}

// TestStudentizedRangeSciPy compares with SciPy: values from SciPy 1.10.1
// scipy.stats.studentized_range, testdata/reference/studentized_range_scipy.py.
// SciPy's ppf and cdf fail at the largest q for df = 1 (at the q it returns
// for p = 1 − 1e-4 and 1 − 1e-5 its upper tail is 4.9e-11, below the
// pairwise lower bound of about 1e-4); rows whose value violates the
// rigorous pairwise bounds are not compared, and the bounds are checked on
// our value instead.
func TestStudentizedRangeSciPy(t *testing.T) {
	t.Parallel()
	rows := readStudentizedRef(t, "studentized_range_scipy.csv")
	var worst srMaxErr
	outside := 0
	srRunGroups(t, rows, 1, &worst, func(t *testing.T, g srRefGroup, quantiles bool, worst srMaxErr) int {
		out := 0
		vals := srRefEval{}
		for _, r := range g.rows {
			if r.kind == "quantile" && !quantiles {
				continue
			}
			got := vals.eval(r)
			if r.kind == "quantile" {
				e := math.Abs(got-r.want) / r.want
				worst.add(r.kind, r.df, e)
				if tol := scipyQuantileTol(r.df); !(e <= tol) {
					t.Errorf("line %d: ppf(%g, %d, %g): SciPy %.17g, got %.17g (rel. error %.2e > %.1e)",
						r.line, r.x, r.k, r.df, r.want, got, e, tol)
				}
				continue
			}
			lo, hi := srPairBounds(r.x, r.k, r.df)
			sf, gotSF := r.want, got
			if r.kind == "cdf" {
				sf, gotSF = 1-r.want, vals.eval(studentizedRef{kind: "sf", k: r.k, df: r.df, x: r.x})
			}
			if slack := 1e-9*hi + 1e-15; sf < lo-slack || sf > hi+slack {
				out++
				if e := srPairSlack(r.df); gotSF < lo*(1-e) || gotSF > hi*(1+e) {
					t.Errorf("line %d: P(Q > %g; %d, %g) = %.17g outside the pairwise bounds [%.17g, %.17g]",
						r.line, r.x, r.k, r.df, gotSF, lo, hi)
				}
				continue
			}
			e := math.Abs(got - r.want)
			worst.add(r.kind, r.df, e)
			if tol := scipyProbTol(r.df); !(e <= tol) {
				t.Errorf("line %d: %s(%g, %d, %g): SciPy %.17g, got %.17g (error %.2e > %.1e)",
					r.line, r.kind, r.x, r.k, r.df, r.want, got, e, tol)
			}
		}
		return out
	}, &outside)
	worst.log(t, "largest difference from SciPy")
	t.Logf("%d SciPy rows outside the pairwise bounds, not compared", outside)
}

// TestStudentizedRangeTwoMeans checks k = 2, where the range is
// |Z_1 − Z_2| ~ √2 |Z|, so Q = √2 |T| with T ~ t_df and, with x = q/√2,
//
//	P(Q ≤ q) = P(|T| ≤ x) = I(x²/(df + x²); 1/2, df/2),
//	P(Q > q) = P(|T| > x) = I(df/(df + x²); df/2, 1/2),
//
// I the regularized incomplete beta function (gonum's mathext.RegIncBeta,
// which distuv.StudentsT also uses; each form keeps the relative accuracy
// of its own tail). For df = 1 and 2 the closed forms (2/π) atan x and
// x/√(2 + x²) are used instead, and for df = ∞ erf(q/2) and erfc(q/2). The
// quantile is checked by putting it back into the exact upper tail. The df
// go up to 30: beyond, gonum's incomplete beta loses accuracy (against R's
// pt: 2e-14 at df = 100, 3e-13 at 1000, 3e-11 at 5e4), and large df are
// covered by TestStudentizedRangeLargeDF and the reference tables.
func TestStudentizedRangeTwoMeans(t *testing.T) {
	t.Parallel()
	// Tolerances: CDF 4e-15 absolute (measured 1.1e-15); upper tail 3e-13
	// relative down to 1e-200 (measured 1.1e-13, at tails below 1e-100 for
	// df = 10 and 30); quantile: the exact upper tail at the returned q
	// within 1e-12 of 1 − p (measured 5.4e-14).
	const cdfTol, sfTol, qTol = 4e-15, 3e-13, 1e-12
	var worstCDF, worstSF, worstQ float64
	for _, df := range []float64{0.5, 1, 1.7, 2, 2.3, 3.5, 7.3, 10, 30, srInf} {
		t.Run(fmt.Sprintf("df=%g", df), func(t *testing.T) {
			exact := func(q float64) (cdf, sf float64) {
				x := q / math.Sqrt2
				switch df {
				case srInf:
					return math.Erf(q / 2), math.Erfc(q / 2)
				case 1:
					return 2 / math.Pi * math.Atan(x), 2 / math.Pi * math.Atan(1/x)
				case 2:
					r := math.Sqrt(2 + x*x)
					return x / r, 2 / (r * (r + x))
				}
				x2 := x * x
				cdf = mathext.RegIncBeta(0.5, df/2, x2/(df+x2))
				sf = mathext.RegIncBeta(df/2, 0.5, df/(df+x2))
				if cdf < 0.5 {
					sf = 1 - cdf
				} else {
					cdf = 1 - sf
				}
				return cdf, sf
			}
			for q := 1e-3; q < 1e100; {
				cdf, sf := exact(q)
				if sf < 1e-200 {
					break
				}
				gotCDF := StudentizedRangeCDF(q, 2, df)
				gotSF := StudentizedRangeSurvival(q, 2, df)
				ec := math.Abs(gotCDF - cdf)
				es := math.Abs(gotSF-sf) / sf
				worstCDF = math.Max(worstCDF, ec)
				worstSF = math.Max(worstSF, es)
				if ec > cdfTol {
					t.Errorf("CDF(%g, 2, %g) = %.17g, want %.17g", q, df, gotCDF, cdf)
				}
				if es > sfTol {
					t.Errorf("Survival(%g, 2, %g) = %.17g, want %.17g (rel. error %.1e)", q, df, gotSF, sf, es)
				}
				if q < 30 {
					q *= 1.5
				} else {
					q *= 1e3
				}
			}
			for _, a := range []float64{0.999, 0.5, 0.1, 0.05, 0.01, 1e-3, 1e-6, 1e-9, 1e-12} {
				p := 1 - a
				alpha := 1 - p // the tail actually asked for
				q := StudentizedRangeQuantile(p, 2, df)
				_, sf := exact(q)
				e := math.Abs(sf/alpha - 1)
				worstQ = math.Max(worstQ, e)
				if e > qTol {
					t.Errorf("Quantile(%g, 2, %g) = %.17g, where the upper tail is %.17g, not %.17g (rel. error %.1e)",
						p, df, q, sf, alpha, e)
				}
			}
		})
	}
	t.Logf("largest errors: CDF %.2e, upper tail (relative) %.2e, quantile (tail, relative) %.2e", worstCDF, worstSF, worstQ)
}

// srExpectedRange returns E[R_k] = ∫ [1 − Φ(z)^k − (1 − Φ(z))^k] dz, the
// expected range of k standard normals, by gonum's fixed Gauss–Legendre
// quadrature (independent of the code under test).
func srExpectedRange(k int) float64 {
	f := func(z float64) float64 {
		p := 0.5 * math.Erfc(-z/math.Sqrt2)
		return 1 - math.Pow(p, float64(k)) - math.Pow(1-p, float64(k))
	}
	return quad.Fixed(f, -12, 12, 2000, quad.Legendre{}, 0)
}

// TestStudentizedRangeUpperTail checks the upper tail for k > 2 far out,
// where SciPy and R lose it (R forms it as 1 − CDF).
//
//   - The pairwise bounds of srPairBounds hold everywhere.
//   - For df = ∞ the union bound is exact to first order: the second terms
//     of the inclusion–exclusion series are O(exp(−q²/3)) against
//     O(exp(−q²/4)) for the pairs, so at q = 30 (tail near 1e-98)
//     P(Q > q) = k(k−1)/2 · erfc(q/2) to within exp(−75).
//   - For df = 1, s is half-normal with density √(2/π) exp(−s²/2), and
//     P(Q > q) = ∫ f(s) P(R > q s) ds = √(2/π) (E[R] − E[R³]/(6q²) + …)/q,
//     so q · P(Q > q) → √(2/π) E[R_k] with relative error O(q⁻²).
func TestStudentizedRangeUpperTail(t *testing.T) {
	t.Parallel()
	for _, k := range []int{3, 5, 10, 50} {
		t.Run(fmt.Sprintf("bounds/k=%d", k), func(t *testing.T) {
			for _, df := range []float64{1, 2.3, 20, srInf} {
				for q := 0.5; q < 1e8; q *= 4 {
					got := StudentizedRangeSurvival(q, k, df)
					if got == 0 {
						break
					}
					lo, hi := srPairBounds(q, k, df)
					if e := srPairSlack(df); got < lo*(1-e) || got > hi*(1+e) {
						t.Errorf("Survival(%g, %d, %g) = %.17g outside [%.17g, %.17g]", q, k, df, got, lo, hi)
					}
				}
			}
		})
		t.Run(fmt.Sprintf("union/k=%d", k), func(t *testing.T) {
			const tol = 1e-13 // measured 2.9e-14
			worst := 0.0
			for _, q := range []float64{30, 35} {
				got := StudentizedRangeSurvival(q, k, srInf)
				want := float64(k*(k-1)) / 2 * math.Erfc(q/2)
				e := math.Abs(got/want - 1)
				worst = math.Max(worst, e)
				if !(e <= tol) {
					t.Errorf("Survival(%g, %d, ∞) = %.17g, want %.17g (rel. error %.1e)", q, k, got, want, e)
				}
			}
			t.Logf("largest relative error %.2e", worst)
		})
		t.Run(fmt.Sprintf("df=1/k=%d", k), func(t *testing.T) {
			// The O(q⁻²) term, E[R³]/(6 E[R] q²), is below 1e-15 from q = 1e8 on
			// (E[R³]/E[R] < 25 for k ≤ 50); tolerance 1e-13
			// (measured 1.5e-14).
			const tol = 1e-13
			lim := math.Sqrt(2/math.Pi) * srExpectedRange(k)
			worst := 0.0
			for _, q := range []float64{1e8, 1e10, 1e12, 1e15} {
				got := q * StudentizedRangeSurvival(q, k, 1)
				e := math.Abs(got/lim - 1)
				worst = math.Max(worst, e)
				if !(e <= tol) {
					t.Errorf("q·Survival(q=%g, %d, 1) = %.17g, want %.17g (rel. error %.1e)", q, k, got, lim, e)
				}
			}
			t.Logf("largest relative error %.2e", worst)
		})
	}
}

// TestStudentizedRangeConsistency checks CDF + upper tail = 1, monotonicity
// in q, and that the quantile inverts the distribution, including
// fractional and very small df and extreme p.
func TestStudentizedRangeConsistency(t *testing.T) {
	t.Parallel()
	for _, k := range []int{2, 7, 25} {
		for _, df := range []float64{0.7, 2.3, 41.2, 3e4, srInf} {
			t.Run(fmt.Sprintf("k=%d/df=%g", k, df), func(t *testing.T) {
				prev := 0.0
				for q := 0.01; q < 200; q *= 1.5 {
					c := StudentizedRangeCDF(q, k, df)
					s := StudentizedRangeSurvival(q, k, df)
					// Each is accurate to about 1e-15 absolute.
					if e := math.Abs(c + s - 1); e > 2e-15 {
						t.Errorf("q = %g: CDF + Survival − 1 = %.2e", q, c+s-1)
					}
					// The CDF is accurate to about 1e-15 absolute, so
					// where it is below that it may wobble by as much.
					if c < prev-1e-16 {
						t.Errorf("CDF(%g) = %.17g < CDF at the previous q, %.17g", q, c, prev)
					}
					prev = c
				}
				for _, p := range []float64{1e-6, 0.001, 0.3, 0.5, 0.9, 0.99, 1 - 1e-6, 1 - 1e-12} {
					q := StudentizedRangeQuantile(p, k, df)
					if p >= 0.5 {
						// The upper tail keeps its relative accuracy.
						alpha := 1 - p
						s := StudentizedRangeSurvival(q, k, df)
						if e := math.Abs(s/alpha - 1); e > 1e-12 {
							t.Errorf("Survival(Quantile(%g)) = %.17g, want %.17g (rel. error %.1e)", p, s, alpha, e)
						}
					} else {
						// The lower tail is accurate in absolute terms, to
						// about 1e-14 (measured 7.1e-15: for large k it is
						// formed from 1 − F(s_m) − J with J near 1).
						c := StudentizedRangeCDF(q, k, df)
						if e := math.Abs(c - p); e > 2e-14 {
							t.Errorf("CDF(Quantile(%g)) = %.17g (error %.1e)", p, c, e)
						}
					}
				}
			})
		}
	}
}

// TestStudentizedRangeLargeDF checks the approach to df = ∞. The
// difference P(Q ≤ q; df) − P(Q ≤ q; ∞) is c/df + O(df⁻²), so df times it
// must settle to a constant, and no jump may appear where the code
// switches to the df = ∞ formula (srLargeDF). R and SciPy switch at 25 000
// and 1e5, where the jump is c/df ≈ 1e-5 to 1e-6.
func TestStudentizedRangeLargeDF(t *testing.T) {
	for _, c := range []struct {
		q float64
		k int
	}{{3.5, 3}, {4.4, 10}, {5.8, 100}, {1.2, 2}} {
		t.Run(fmt.Sprintf("q=%g/k=%d", c.q, c.k), func(t *testing.T) {
			pInf := StudentizedRangeCDF(c.q, c.k, srInf)
			ref := (StudentizedRangeCDF(c.q, c.k, 1e6) - pInf) * 1e6
			if ref == 0 {
				t.Fatal("no df dependence at df = 1e6")
			}
			for _, df := range []float64{1e5, 1e7, 1e8} {
				d := (StudentizedRangeCDF(c.q, c.k, df) - pInf) * df
				// Relative change of c: O(1/df) plus rounding of the
				// difference, 1e-16·df/|c|.
				tol := 1e-4 + 1e-15*df/math.Abs(ref)
				if e := math.Abs(d/ref - 1); e > tol {
					t.Errorf("df = %g: df·(P(df) − P(∞)) = %.6g, at df = 1e6 %.6g", df, d, ref)
				}
			}
			below := StudentizedRangeCDF(c.q, c.k, 0.999*srLargeDF)
			above := StudentizedRangeCDF(c.q, c.k, 1.001*srLargeDF)
			// Both sides are accurate to about 2e-15 (the Chebyshev
			// proxy of the outer integrand is used on one side only).
			if e := math.Abs(below - above); e > 5e-15 {
				t.Errorf("jump %.2e at df = %g", below-above, srLargeDF)
			}
			if e := math.Abs(below - pInf); e > 5e-15 {
				t.Errorf("P(df = %g) − P(∞) = %.2e", 0.999*srLargeDF, below-pInf)
			}
		})
	}
}

func TestStudentizedRangeSpecialValues(t *testing.T) {
	nan := math.NaN()
	for _, c := range []struct {
		name    string
		q, p    float64
		k       int
		df      float64
		cdf, sf float64
		quant   float64
	}{
		{"k=1", 1, 0.5, 1, 10, nan, nan, nan},
		{"k=0", 1, 0.5, 0, 10, nan, nan, nan},
		{"df=0", 1, 0.5, 3, 0, nan, nan, nan},
		{"df<0", 1, 0.5, 3, -2, nan, nan, nan},
		{"df=NaN", 1, 0.5, 3, nan, nan, nan, nan},
		{"q=NaN p=NaN", nan, nan, 3, 10, nan, nan, nan},
		{"p<0", nan, -0.1, 3, 10, nan, nan, nan},
		{"p>1", nan, 1.1, 3, 10, nan, nan, nan},
		{"p=-Inf", nan, math.Inf(-1), 3, srInf, nan, nan, nan},
		{"q=0 p=0", 0, 0, 3, 10, 0, 1, 0},
		{"q<0 p=1", -1, 1, 3, 10, 0, 1, srInf},
		{"q=Inf", srInf, 1, 4, srInf, 1, 0, srInf},
		{"q=-Inf", math.Inf(-1), 0, 4, 2.5, 0, 1, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			same := func(a, b float64) bool { return a == b || math.IsNaN(a) && math.IsNaN(b) }
			if got := StudentizedRangeCDF(c.q, c.k, c.df); !same(got, c.cdf) {
				t.Errorf("CDF(%g, %d, %g) = %g, want %g", c.q, c.k, c.df, got, c.cdf)
			}
			if got := StudentizedRangeSurvival(c.q, c.k, c.df); !same(got, c.sf) {
				t.Errorf("Survival(%g, %d, %g) = %g, want %g", c.q, c.k, c.df, got, c.sf)
			}
			if got := StudentizedRangeQuantile(c.p, c.k, c.df); !same(got, c.quant) {
				t.Errorf("Quantile(%g, %d, %g) = %g, want %g", c.p, c.k, c.df, got, c.quant)
			}
		})
	}
}

// TestStudentizedRangeInner compares the inner integrals W_k(w) and V_k(w)
// (the df = ∞ distribution) with an independent quadrature of the same
// integrands: gonum's quad.Fixed with 1500 Gauss–Legendre nodes over
// [−14, max(14, w/2 + 14)], beyond which the integrands are below 1e-40,
// with Φ(z) − Φ(z − w) from a 20-node quadrature of φ for w < 1/2 and from
// the two upper or two lower tails otherwise.
// This checks the lattice step, the truncation bounds and the series used
// for small w, for k up to 300. Both computations raise Φ(z) − Φ(z − w) to
// the power k − 1, which multiplies its rounding by k − 1; the tolerances
// grow accordingly, and for V at large w with the rounding of φ(z) at
// z ≈ w/2 (relative error about ε z²/2).
func TestStudentizedRangeInner(t *testing.T) {
	t.Parallel()
	phi := func(z float64) float64 { return math.Exp(-z*z/2) / math.Sqrt(2*math.Pi) }
	cdf := func(z float64) float64 { return 0.5 * math.Erfc(-z/math.Sqrt2) }
	for _, k := range []int{2, 3, 5, 16, 50, 100, 300} {
		if testing.Short() && k != 3 && k != 100 {
			continue
		}
		t.Run(fmt.Sprintf("k=%d", k), func(t *testing.T) {
			m := float64(k - 1)
			var d rangeDist
			d.init(k)
			for _, w := range []float64{0.01, 0.1, 0.3, 0.49, 0.51, 1, 2, 3.5, 5, 7, 10, 15, 25, 40} {
				hi := math.Max(14, w/2+14)
				srBand := func(z float64) float64 {
					switch {
					case w < 0.5:
						return quad.Fixed(phi, z-w, z, 20, quad.Legendre{}, 0)
					case z > w:
						return cdf(w-z) - cdf(-z)
					}
					return cdf(z) - cdf(z-w)
				}
				upper := func(z float64) float64 {
					p, pw := cdf(z), cdf(z-w)
					if p == 0 || pw == 0 {
						return 0
					}
					var t float64
					if r := pw / p; r < 0.5 {
						t = m * math.Log1p(-r)
					} else {
						t = m * math.Log(srBand(z)/p)
					}
					return -float64(k) * phi(z) * math.Pow(p, m) * math.Expm1(t)
				}
				lower := func(z float64) float64 { return float64(k) * phi(z) * math.Pow(srBand(z), m) }
				wantV := quad.Fixed(upper, -14, hi, 1500, quad.Legendre{}, 0)
				gotV := d.survival(w)
				// V to 1e-14 + 2e-17 w² relative (measured 2.1e-14 at
				// w = 40, 3.5e-15 for w ≤ 15).
				if e := math.Abs(gotV/wantV - 1); !(e <= 1e-14+2e-17*w*w) {
					t.Errorf("V(%g) = %.17g, want %.17g (rel. error %.1e)", w, gotV, wantV, e)
				}
				if w > 10 {
					continue
				}
				wantW := quad.Fixed(lower, -14, w+14, 1500, quad.Legendre{}, 0)
				gotW := d.cdf(w)
				// W to 2e-15 + 5e-16 (k − 1) absolute (measured 2.1e-15 for
				// k = 3, 1.8e-14 for k = 100, 8.2e-14 for k = 300), and for
				// w < 1/2, where it is summed with the series, to 1e-13
				// relative wherever it does not underflow.
				if e := math.Abs(gotW - wantW); !(e <= 2e-15+5e-16*m) {
					t.Errorf("W(%g) = %.17g, want %.17g (error %.1e)", w, gotW, wantW, e)
				}
				if w < srSeriesW && wantW > 1e-280 {
					if e := math.Abs(gotW/wantW - 1); !(e <= 1e-13) {
						t.Errorf("W(%g) = %.17g, want %.17g (rel. error %.1e)", w, gotW, wantW, e)
					}
				}
			}
		})
	}
}

// TestStudentizedRangeGaussLegendre checks the 20-point rule against gonum's
// quad.Legendre and by integrating x^(2j), j < 20, exactly (degree ≤ 39).
func TestStudentizedRangeGaussLegendre(t *testing.T) {
	n := 2 * len(srGL20)
	x := make([]float64, n)
	w := make([]float64, n)
	quad.Legendre{}.FixedLocations(x, w, -1, 1)
	type node struct{ x, w float64 }
	var ref []node
	for i := range x {
		if x[i] > 0 {
			ref = append(ref, node{x[i], w[i]})
		}
	}
	sort.Slice(ref, func(i, j int) bool { return ref[i].x < ref[j].x })
	if len(ref) != len(srGL20) {
		t.Fatalf("gonum gives %d positive nodes, want %d", len(ref), len(srGL20))
	}
	for i, r := range srGL20 {
		// gonum's nodes are computed in float64, to a few ulps.
		if math.Abs(r[0]-ref[i].x) > 4e-16 || math.Abs(r[1]-ref[i].w) > 4e-16 {
			t.Errorf("node %d: (%.17g, %.17g), gonum (%.17g, %.17g)", i, r[0], r[1], ref[i].x, ref[i].w)
		}
	}
	for j := 0; j < n; j++ {
		f := func(x float64) float64 { return math.Pow(x, float64(j)) }
		want := 0.0
		if j%2 == 0 {
			want = 2 / float64(j+1)
		}
		if got := srGLPanel(f, -1, 1); math.Abs(got-want) > 2e-15 {
			t.Errorf("∫x^%d = %.17g, want %.17g", j, got, want)
		}
	}
}

// TestStudentizedRangeStirling compares δ(a) with log Γ(a) − (a − ½) log a + a − ½ log 2π
// formed directly (exact up to its cancellation, about 1e-14 for a ≤ 30).
func TestStudentizedRangeStirling(t *testing.T) {
	for _, a := range []float64{0.3, 1, 2.5, 14.9, 15, 15.1, 20, 30} {
		lg, _ := math.Lgamma(a)
		want := lg - (a-0.5)*math.Log(a) + a - 0.5*math.Log(2*math.Pi)
		if got := srStirlingErr(a); math.Abs(got-want) > 2e-14 {
			t.Errorf("srStirlingErr(%g) = %.17g, want %.17g", a, got, want)
		}
	}
	// Large a: δ(a) → 1/(12a).
	if got := srStirlingErr(1e8) * 12e8; math.Abs(got-1) > 1e-15 {
		t.Errorf("12a·δ(a) at a = 1e8 is %.17g", got)
	}
}

// TestStudentizedRangeExpm1mx compares e^y − 1 − y with a 200-bit Taylor series.
func TestStudentizedRangeExpm1mx(t *testing.T) {
	for _, y := range []float64{-0.7, -0.5, -0.49, -0.1, -1e-3, -1e-9, 1e-9, 1e-3, 0.1, 0.49, 0.5, 0.7, 3} {
		yb := new(big.Float).SetPrec(200).SetFloat64(y)
		term := new(big.Float).SetPrec(200).SetFloat64(1)
		sum := new(big.Float).SetPrec(200)
		for n := 1; n < 120; n++ {
			term.Mul(term, yb)
			term.Quo(term, new(big.Float).SetPrec(200).SetInt64(int64(n)))
			if n >= 2 {
				sum.Add(sum, term)
			}
		}
		want, _ := sum.Float64()
		if got := srExpm1mx(y); math.Abs(got-want) > 4e-16*math.Abs(want) {
			t.Errorf("srExpm1mx(%g) = %.17g, want %.17g", y, got, want)
		}
	}
}

// ExampleStudentizedRangeQuantile prints the critical value of Tukey's HSD
// test for 3 groups and 10 error degrees of freedom at the 5% level. The
// common handbook table value is 3.877; R's qtukey(0.95, 3, 10) gives
// 3.8767767 (testdata/reference/studentized_range.csv).
func ExampleStudentizedRangeQuantile() {
	q := StudentizedRangeQuantile(0.95, 3, 10)
	fmt.Printf("%.4f\n", q)
	fmt.Printf("%.4f\n", StudentizedRangeSurvival(q, 3, 10))
	// Output:
	// 3.8768
	// 0.0500
}

func BenchmarkStudentizedRangeCDF(b *testing.B) {
	for b.Loop() {
		StudentizedRangeCDF(3.5, 5, 12.3)
	}
}

func BenchmarkStudentizedRangeSurvival(b *testing.B) {
	for b.Loop() {
		StudentizedRangeSurvival(6.2, 5, 12.3)
	}
}

func BenchmarkStudentizedRangeQuantile(b *testing.B) {
	for b.Loop() {
		StudentizedRangeQuantile(0.95, 5, 12.3)
	}
}

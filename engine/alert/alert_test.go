package alert

import (
	"encoding/csv"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// refCase is one row of testdata/crossing.csv, written by
// testdata/crossing.R (R 4.2.2 stats::pnorm, rnorm; mvtnorm 1.1-3 pmvnorm).
type refCase struct {
	name, kind, direction      string
	x0, a, b, sigma, threshold float64
	k, h                       int
	pEnd, pGenz, genzErr       float64
	pSim, simSE                float64
}

func loadCases(t *testing.T) []refCase {
	t.Helper()
	f, err := os.Open("testdata/crossing.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, name := range rows[0] {
		col[name] = i
	}
	num := func(r []string, name string) float64 {
		v, err := strconv.ParseFloat(r[col[name]], 64)
		if err != nil {
			t.Fatalf("crossing.csv column %s: %v", name, err)
		}
		return v
	}
	var out []refCase
	for _, r := range rows[1:] {
		out = append(out, refCase{
			name: r[col["name"]], kind: r[col["kind"]], direction: r[col["direction"]],
			x0: num(r, "x0"), a: num(r, "a"), b: num(r, "b"), sigma: num(r, "sigma"),
			threshold: num(r, "threshold"), k: int(num(r, "k")), h: int(num(r, "h")),
			pEnd: num(r, "p_end"), pGenz: num(r, "p_genz"), genzErr: num(r, "genz_err"),
			pSim: num(r, "p_sim"), simSE: num(r, "sim_se"),
		})
	}
	if len(out) == 0 {
		t.Fatal("crossing.csv has no cases")
	}
	return out
}

// moments returns the forecast means, variances and the covariance
// callback of the case's process (the formulas in testdata/crossing.R).
func (c refCase) moments() (mean, variance []float64, joint func([]float64)) {
	mean = make([]float64, c.h)
	variance = make([]float64, c.h)
	cov := func(i, j int) float64 { // 1-based steps
		lo := min(i, j)
		if c.kind == "rw" {
			return float64(lo) * c.sigma * c.sigma
		}
		return c.sigma * c.sigma * math.Pow(c.a, math.Abs(float64(i-j))) *
			(1 - math.Pow(c.a, 2*float64(lo))) / (1 - c.a*c.a)
	}
	for j := 1; j <= c.h; j++ {
		if c.kind == "rw" {
			mean[j-1] = c.x0 + float64(j)*c.a
		} else {
			mean[j-1] = c.b + math.Pow(c.a, float64(j))*(c.x0-c.b)
		}
		variance[j-1] = cov(j, j)
	}
	h := c.h
	joint = func(dst []float64) {
		for i := 1; i <= h; i++ {
			for j := 1; j <= h; j++ {
				dst[(i-1)*h+j-1] = cov(i, j)
			}
		}
	}
	return mean, variance, joint
}

func (c refCase) query(monotone bool) *Query {
	mean, variance, _ := c.moments()
	d := Above
	if c.direction == "below" {
		d = Below
	}
	return &Query{Mean: mean, Variance: variance, Threshold: c.threshold, Direction: d, Window: c.k, Monotone: monotone}
}

// step draws the case's process one step on from x.
func (c refCase) step(x float64, rng *rand.Rand) float64 {
	e := c.sigma * rng.NormFloat64()
	if c.kind == "rw" {
		return x + c.a + e
	}
	return c.b + c.a*(x-c.b) + e
}

// beyond reports whether x is past the case's threshold in its direction.
func (c refCase) beyond(x float64) bool {
	if c.direction == "below" {
		return x < c.threshold
	}
	return x > c.threshold
}

// bruteForce simulates the case's process step by step (no covariance,
// no Cholesky) and returns the fraction of paths beyond the threshold at
// step k (end) and at any step ≤ k (any), with their standard errors.
func (c refCase) bruteForce(n int, seed uint64) (end, any, seEnd, seAny float64) {
	rng := rand.New(rand.NewPCG(seed, 7))
	var nEnd, nAny int
	for p := 0; p < n; p++ {
		x, crossed := c.x0, false
		for j := 1; j <= c.k; j++ {
			x = c.step(x, rng)
			crossed = crossed || c.beyond(x)
		}
		if crossed {
			nAny++
		}
		if c.beyond(x) {
			nEnd++
		}
	}
	N := float64(n)
	end, any = float64(nEnd)/N, float64(nAny)/N
	return end, any, math.Sqrt(end * (1 - end) / N), math.Sqrt(any * (1 - any) / N)
}

func newEval(t testing.TB, h, paths int) *Evaluator {
	t.Helper()
	e, err := NewEvaluator(h, paths)
	if err != nil {
		t.Fatal(err)
	}
	return e
}

// Counter mode: P(X_k > c) = 1 − Φ((c − x₀ − kμ)/(σ√k)) for the random walk
// (closed form; Φ from gonum distuv.Normal), R 4.2.2 pnorm for every case
// (testdata/crossing.csv p_end), and a brute-force walk simulation
// (10⁵ paths, 4 SE).
func TestMarginalClosedForm(t *testing.T) {
	e := newEval(t, 60, 0)
	for _, c := range loadCases(t) {
		q := c.query(true)
		p, _, err := e.Probability(q, nil)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if e.LastMethod() != MethodMarginal {
			t.Errorf("%s: method %v, want marginal", c.name, e.LastMethod())
		}
		// R 4.2.2 pnorm, 15 significant digits in the CSV.
		if math.Abs(p-c.pEnd) > 1e-12+1e-9*c.pEnd {
			t.Errorf("%s: p = %.15g, R pnorm %.15g", c.name, p, c.pEnd)
		}
		if c.kind == "rw" {
			// Closed form with gonum distuv.Normal.
			n := distuv.Normal{Mu: c.x0 + float64(c.k)*c.a, Sigma: c.sigma * math.Sqrt(float64(c.k))}
			want := n.Survival(c.threshold)
			if c.direction == "below" {
				want = n.CDF(c.threshold)
			}
			if math.Abs(p-want) > 1e-13 {
				t.Errorf("%s: p = %.15g, closed form %.15g", c.name, p, want)
			}
		}
		end, _, seEnd, _ := c.bruteForce(100000, 11)
		if math.Abs(p-end) > 4*seEnd+1e-9 {
			t.Errorf("%s: p = %.5f, walk simulation %.5f ± %.5f", c.name, p, end, seEnd)
		}
	}
}

// Gauge mode: P(cross at any step ≤ k) against R mvtnorm 1.1-3 pmvnorm
// (Genz 1992 algorithm; tolerance 4·sqrt(SE² + err²)), against R's brute-force
// simulation (10⁶ paths) and our own brute-force walk (10⁵ paths), each with
// 4 combined standard errors.
func TestGaugeCrossingAgainstReferences(t *testing.T) {
	e := newEval(t, 60, 0)
	for _, c := range loadCases(t) {
		q := c.query(false)
		_, _, joint := c.moments()
		p, _, err := e.Probability(q, joint)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		se := e.StdErr()
		if se > 0.5/math.Sqrt(float64(e.Paths()))+1e-12 {
			t.Errorf("%s: SE %.5f above 0.5/sqrt(N)", c.name, se)
		}
		if tol := 4 * math.Hypot(se, c.genzErr); math.Abs(p-c.pGenz) > tol+1e-9 {
			t.Errorf("%s: p = %.5f, pmvnorm %.5f, tol %.5f", c.name, p, c.pGenz, tol)
		}
		if tol := 4 * math.Hypot(se, c.simSE); math.Abs(p-c.pSim) > tol+1e-9 {
			t.Errorf("%s: p = %.5f, R simulation %.5f, tol %.5f", c.name, p, c.pSim, tol)
		}
		_, any, _, seAny := c.bruteForce(100000, 13)
		if tol := 4 * math.Hypot(se, seAny); math.Abs(p-any) > tol+1e-9 {
			t.Errorf("%s: p = %.5f, walk simulation %.5f, tol %.5f", c.name, p, any, tol)
		}
		t.Logf("%s: p = %.5f (%v, SE %.5f), pmvnorm %.5f, R sim %.5f, Go sim %.5f", c.name, p, e.LastMethod(), se, c.pGenz, c.pSim, any)
	}
}

// Reflection principle (Bachelier 1900; Lévy 1948), sanity bound only: for a
// driftless walk the discrete-step crossing probability lies between the
// end-of-window marginal and 2·P(X_k > c). crossing.csv holds one
// driftless walk (rw_driftless); the others do not apply and are counted
// as skipped.
func TestReflectionSanityBound(t *testing.T) {
	e := newEval(t, 60, 0)
	cases := loadCases(t)
	checked, skipped := 0, 0
	for _, c := range cases {
		if c.kind != "rw" || c.a != 0 {
			skipped++
			continue
		}
		checked++
		_, _, joint := c.moments()
		p, _, err := e.Probability(c.query(false), joint)
		if err != nil {
			t.Fatal(err)
		}
		end := distuv.Normal{Mu: c.x0, Sigma: c.sigma * math.Sqrt(float64(c.k))}.Survival(c.threshold)
		if p < end || p > 2*end {
			t.Errorf("%s: p = %.5f outside [%.5f, %.5f]", c.name, p, end, 2*end)
		}
	}
	if checked < 1 || checked+skipped != len(cases) {
		t.Fatalf("checked %d driftless walks, skipped %d of %d cases; want at least 1 checked", checked, skipped, len(cases))
	}
}

// eta lies within one step of the analytic median crossing time (c − x₀)/μ
// of the drifting random walk (mean x₀ + jμ; common practice: the first
// integer step with x₀ + jμ > c is ⌊(c − x₀)/μ⌋ + 1). crossing.csv holds
// four drifting walks: three cross inside the horizon (rw_drift_down_below
// at 50 of 60 steps, rw_one_step at 7.5 of 10, rw_short_window at 20 of
// 60) and one beyond it (rw_drift_up, 70 of 60), whose eta must be 0; the
// other cases do not apply and are counted as skipped.
func TestEtaMedianCrossing(t *testing.T) {
	e := newEval(t, 60, 0)
	cases := loadCases(t)
	inside, beyond, skipped := 0, 0, 0
	for _, c := range cases {
		if c.kind != "rw" || c.a == 0 {
			skipped++
			continue
		}
		_, eta, err := e.Probability(c.query(true), nil)
		if err != nil {
			t.Fatal(err)
		}
		tStar := (c.threshold - c.x0) / c.a
		if tStar > float64(c.h) {
			if eta != 0 {
				t.Errorf("%s: eta %d, analytic %.2f beyond horizon %d", c.name, eta, tStar, c.h)
			}
			beyond++
			continue
		}
		if math.Abs(float64(eta)-tStar) > 1 {
			t.Errorf("%s: eta %d, analytic %.2f", c.name, eta, tStar)
		}
		inside++
	}
	if inside < 3 || beyond < 1 || inside+beyond+skipped != len(cases) {
		t.Fatalf("checked %d crossings inside the horizon and %d beyond it, skipped %d of %d cases; want at least 3 and 1",
			inside, beyond, skipped, len(cases))
	}
	// Never beyond within the horizon: 0.
	q := &Query{Mean: []float64{1, 2, 3}, Variance: []float64{1, 2, 3}, Threshold: 3, Direction: Above, Window: 3, Monotone: true}
	if _, eta, err := e.Probability(q, nil); err != nil || eta != 0 {
		t.Errorf("eta = %d, err %v; want 0 (mean reaches but never exceeds c)", eta, err)
	}
}

// farQuery is a drifting walk (x₀ = 0, μ = 0.1, σ = 0.5) with a threshold far
// above: the union bound at h = 60 is far below Negligible.
func farQuery(h int) (*Query, func([]float64)) {
	c := refCase{kind: "rw", x0: 0, a: 0.1, sigma: 0.5, threshold: 100, k: h, h: h, direction: "above"}
	mean, variance, joint := c.moments()
	return &Query{Mean: mean, Variance: variance, Threshold: c.threshold, Direction: Above, Window: h}, joint
}

// Union-bound skip: no covariance, no allocation, and the returned value is
// a valid upper bound of Σ_j P_j (Boole's inequality), itself ≥ p.
func TestFarFromThresholdSkips(t *testing.T) {
	e := newEval(t, 60, 0)
	q, joint := farQuery(60)
	called := 0
	cb := func(cov []float64) { called++; joint(cov) }
	p, eta, err := e.Probability(q, cb)
	if err != nil {
		t.Fatal(err)
	}
	if called != 0 || e.LastMethod() != MethodSkip {
		t.Errorf("covariance called %d times, method %v", called, e.LastMethod())
	}
	sum := 0.0
	for j := range q.Mean {
		sum += distuv.Normal{Mu: q.Mean[j], Sigma: math.Sqrt(q.Variance[j])}.Survival(q.Threshold)
	}
	if !(p >= sum && p <= Negligible) || eta != 0 {
		t.Errorf("p = %g, union sum %g, eta %d", p, sum, eta)
	}
	allocs := testing.AllocsPerRun(100, func() { _, _, _ = e.Probability(q, cb) })
	if allocs != 0 {
		t.Errorf("far path allocates %v times", allocs)
	}
	if called != 0 {
		t.Errorf("covariance called %d times during AllocsPerRun", called)
	}
}

// The simulation path reuses its workspaces too.
func TestNearThresholdDoesNotAllocate(t *testing.T) {
	e := newEval(t, 60, MinPaths)
	c := loadCases(t)[0]
	_, _, joint := c.moments()
	q := c.query(false)
	allocs := testing.AllocsPerRun(3, func() { _, _, _ = e.Probability(q, joint) })
	if allocs != 0 || e.LastMethod() != MethodSimulation {
		t.Errorf("near path: %v allocations, method %v", allocs, e.LastMethod())
	}
}

// Independent steps (diagonal covariance): p = 1 − Π_j (1 − P_j) exactly
// (product rule for independent events; P_j from gonum distuv.Normal).
func TestIndependentStepsExact(t *testing.T) {
	e := newEval(t, 10, 0)
	mean := []float64{0, 0.5, 1, 1.5, 2, 2.5, 3, 3.5, 4, 4.5}
	variance := []float64{1, 1, 2, 2, 3, 3, 4, 4, 5, 5}
	h := len(mean)
	joint := func(cov []float64) {
		clear(cov)
		for j := range h {
			cov[j*h+j] = variance[j]
		}
	}
	for _, d := range []Direction{Above, Below} {
		c := 5.0
		if d == Below {
			c = -0.5
		}
		safe := 1.0
		for j := range h {
			n := distuv.Normal{Mu: mean[j], Sigma: math.Sqrt(variance[j])}
			pj := n.Survival(c)
			if d == Below {
				pj = n.CDF(c)
			}
			safe *= 1 - pj
		}
		want := 1 - safe
		q := &Query{Mean: mean, Variance: variance, Threshold: c, Direction: d, Window: h}
		p, _, err := e.Probability(q, joint)
		if err != nil {
			t.Fatal(err)
		}
		tol := 4*e.StdErr() + 1e-12
		if e.LastMethod() == MethodBracket {
			tol = BracketTol
		}
		if math.Abs(p-want) > tol {
			t.Errorf("%v: p = %.5f (%v), exact %.5f, tol %.5f", d, p, e.LastMethod(), want, tol)
		}
	}
}

// Perfectly correlated steps (rank-one covariance σ²·11ᵀ): W_j = m_j + σZ, so
// p = max_j P_j exactly. Exercises the semi-definite Cholesky.
func TestRankOneCovariance(t *testing.T) {
	e := newEval(t, 5, 0)
	mean := []float64{0, 1, 2, 1.5, 0.5}
	variance := []float64{4, 4, 4, 4, 4}
	h := len(mean)
	joint := func(cov []float64) {
		for i := range cov {
			cov[i] = 4
		}
	}
	q := &Query{Mean: mean, Variance: variance, Threshold: 3, Direction: Above, Window: h}
	p, eta, err := e.Probability(q, joint)
	if err != nil {
		t.Fatal(err)
	}
	want := distuv.Normal{Mu: 2, Sigma: 2}.Survival(3)
	if math.Abs(p-want) > 4*e.StdErr()+1e-9 || eta != 0 {
		t.Errorf("p = %.5f (SE %.5f, %v), exact %.5f; eta %d", p, e.StdErr(), e.LastMethod(), want, eta)
	}
}

// Below on W equals Above on −W (the covariance of −W is that of W).
func TestBelowMirrorsAbove(t *testing.T) {
	e := newEval(t, 60, 0)
	c := loadCases(t)[0]
	mean, variance, joint := c.moments()
	neg := make([]float64, len(mean))
	for i, m := range mean {
		neg[i] = -m
	}
	qa := &Query{Mean: mean, Variance: variance, Threshold: c.threshold, Direction: Above, Window: c.k, Seed: 42}
	qb := &Query{Mean: neg, Variance: variance, Threshold: -c.threshold, Direction: Below, Window: c.k, Seed: 42}
	pa, ea, err1 := e.Probability(qa, joint)
	pb, eb, err2 := e.Probability(qb, joint)
	if err1 != nil || err2 != nil || pa != pb || ea != eb {
		t.Errorf("above %v %d %v, below %v %d %v", pa, ea, err1, pb, eb, err2)
	}
}

// Equal queries give equal results (seed derived from the values); a
// different explicit seed changes the draw but not beyond Monte Carlo error.
func TestDeterministic(t *testing.T) {
	e := newEval(t, 60, 0)
	c := loadCases(t)[1]
	_, _, joint := c.moments()
	q := c.query(false)
	p1, _, _ := e.Probability(q, joint)
	p2, _, _ := e.Probability(q, joint)
	f := newEval(t, 60, 0)
	p3, _, _ := f.Probability(q, joint)
	if p1 != p2 || p1 != p3 {
		t.Errorf("same query: %v %v %v", p1, p2, p3)
	}
	q.Seed = 12345
	p4, _, _ := e.Probability(q, joint)
	if p4 == p1 || math.Abs(p4-p1) > 6*e.StdErr() {
		t.Errorf("seeded %v vs derived %v (SE %v)", p4, p1, e.StdErr())
	}
}

func TestBadInput(t *testing.T) {
	e := newEval(t, 4, 0)
	good := func() *Query {
		return &Query{Mean: []float64{0, 1, 2}, Variance: []float64{1, 2, 3}, Threshold: 2.5, Direction: Above, Window: 3}
	}
	ok := func(cov []float64) {
		for i := range 3 {
			for j := range 3 {
				cov[i*3+j] = float64(min(i, j) + 1)
			}
		}
	}
	notPSD := func(cov []float64) {
		ok(cov)
		cov[1], cov[3] = 5, 5 // |ρ| > 1
	}
	asym := func(cov []float64) { ok(cov); cov[1] = 0.5 }
	wrongDiag := func(cov []float64) { ok(cov); cov[4] = 7 }
	nanCov := func(cov []float64) { ok(cov); cov[5], cov[7] = math.NaN(), math.NaN() }
	cases := []struct {
		name  string
		edit  func(q *Query)
		joint func([]float64)
		want  error
	}{
		{"empty", func(q *Query) { q.Mean, q.Variance = nil, nil }, ok, ErrShape},
		{"lengths", func(q *Query) { q.Variance = q.Variance[:2] }, ok, ErrShape},
		{"horizon", func(q *Query) { q.Mean = make([]float64, 5); q.Variance = make([]float64, 5) }, ok, ErrHorizon},
		{"window0", func(q *Query) { q.Window = 0 }, ok, ErrWindow},
		{"window>h", func(q *Query) { q.Window = 4 }, ok, ErrWindow},
		{"direction", func(q *Query) { q.Direction = 0 }, ok, ErrDirection},
		{"nan mean", func(q *Query) { q.Mean[1] = math.NaN() }, ok, ErrNotFinite},
		{"inf variance", func(q *Query) { q.Variance[2] = math.Inf(1) }, ok, ErrNotFinite},
		{"inf threshold", func(q *Query) { q.Threshold = math.Inf(-1) }, ok, ErrNotFinite},
		{"negative variance", func(q *Query) { q.Variance[0] = -1 }, ok, ErrNegativeVariance},
		{"no callback", func(q *Query) {}, nil, ErrNoCovariance},
		{"not psd", func(q *Query) {}, notPSD, ErrNotPSD},
		{"asymmetric", func(q *Query) {}, asym, ErrCovariance},
		{"diagonal", func(q *Query) {}, wrongDiag, ErrCovariance},
		{"nan covariance", func(q *Query) {}, nanCov, ErrCovariance},
	}
	for _, tc := range cases {
		q := good()
		tc.edit(q)
		_, _, err := e.Probability(q, tc.joint)
		if !errors.Is(err, tc.want) {
			t.Errorf("%s: err %v, want %v", tc.name, err, tc.want)
		}
	}
	if _, err := NewEvaluator(0, 0); !errors.Is(err, ErrMaxHorizon) {
		t.Errorf("NewEvaluator(0, 0): %v", err)
	}
	if _, err := NewEvaluator(10, MinPaths-1); !errors.Is(err, ErrPaths) {
		t.Errorf("NewEvaluator(10, %d): %v", MinPaths-1, err)
	}
}

// Bracket: when only one step carries probability, max_j P_j and Σ_j P_j
// (Boole's inequality) pin p for any covariance; the midpoint is returned
// without the callback. Checked against the two exact extremes: independent
// steps, p = 1 − Π(1 − P_j), and perfectly correlated steps, p = max_j P_j
// (P_j from gonum distuv.Normal).
func TestBracketNeedsNoCovariance(t *testing.T) {
	e := newEval(t, 6, 0)
	mean := []float64{0, 0, 0, 0, 0, 4}
	variance := []float64{1, 1, 1, 1, 1, 1}
	q := &Query{Mean: mean, Variance: variance, Threshold: 4.5, Direction: Above, Window: 6}
	called := false
	p, eta, err := e.Probability(q, func([]float64) { called = true })
	if err != nil {
		t.Fatal(err)
	}
	if called || e.LastMethod() != MethodBracket || eta != 0 {
		t.Fatalf("called %v, method %v, eta %d", called, e.LastMethod(), eta)
	}
	safe, maxP := 1.0, 0.0
	for j := range mean {
		pj := distuv.Normal{Mu: mean[j], Sigma: 1}.Survival(q.Threshold)
		safe *= 1 - pj
		maxP = math.Max(maxP, pj)
	}
	for name, want := range map[string]float64{"independent": 1 - safe, "correlated": maxP} {
		if math.Abs(p-want) > BracketTol {
			t.Errorf("%s: p = %.6f, exact %.6f", name, p, want)
		}
	}
}

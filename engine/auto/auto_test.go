package auto

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"forewarn/engine/arima"
	"forewarn/engine/internal/refdata"
	"forewarn/engine/transform"
)

// The series are those of R 4.2.2 `datasets`, exported to
// testdata/datasets/NAME.csv by testdata/r/arima_refs.R (NA = missing) and
// read with refdata.Dataset.

// rRef is one case of testdata/r/arima_refs.json (R 4.2.2 stats::arima,
// method "ML").
type rRef struct {
	ID, Data, Transform string
	Order, Seasonal     []int
	Period              int
	LogLik, AIC         float64
	NObs                int
}

func loadRefs(t *testing.T) map[string]rRef {
	t.Helper()
	var doc struct{ Cases []rRef }
	refdata.JSON(t, "r/arima_refs.json", &doc)
	m := map[string]rRef{}
	for _, c := range doc.Cases {
		m[c.ID] = c
	}
	return m
}

// aicc is AIC + 2(k+1)(k+2)/(n−k−2) (Hurvich & Tsai 1989), k the number of
// estimated coefficients.
func aicc(aic float64, k, n int) float64 {
	return aic + 2*float64(k+1)*float64(k+2)/float64(n-k-2)
}

// TestFixedModelMatchesR: with the order fixed and no transform, Select's
// fit is R's fit, and its raw AICc is R's AIC corrected for small samples.
// Source: R 4.2.2 stats::arima(method = "ML"), testdata/r/arima_refs.json.
func TestFixedModelMatchesR(t *testing.T) {
	refs := loadRefs(t)
	for _, tc := range []struct {
		id, model string
		period, k int
	}{
		{"USAccDeaths_airline", "0,1,1 x 0,1,1", 12, 2},
		{"LakeHuron_ar2", "2,0,0", 0, 3},
		{"WWWusage_111", "1,1,1", 0, 2},
	} {
		ref := refs[tc.id]
		y := refdata.Dataset(t, ref.Data)
		c, err := Select(y, Options{Period: tc.period, Transform: "none", Model: tc.model})
		if err != nil {
			t.Fatalf("%s: %v", tc.id, err)
		}
		// Tolerance: the arima package's acceptance (loglik within 0.01 of R).
		if math.Abs(c.Result.LogLik-ref.LogLik) > 0.01 {
			t.Errorf("%s: loglik %.4f, R 4.2.2 %.4f", tc.id, c.Result.LogLik, ref.LogLik)
		}
		want := aicc(ref.AIC, tc.k, ref.NObs)
		if math.Abs(c.RawAICc-want) > 0.02 {
			t.Errorf("%s: raw AICc %.4f, from R's AIC %.4f", tc.id, c.RawAICc, want)
		}
		if len(c.Tried) != 1 || c.Transform.Name != transform.None {
			t.Errorf("%s: tried %v, transform %v; want one fit, none", tc.id, c.Tried, c.Transform)
		}
	}
}

// TestRawAICcJacobian: the log airline fit of AirPassengers on the raw
// scale is R's log-scale loglik 244.70 minus Σ log x over the 131
// observations after the first d + sD = 13 (Box & Cox 1964; R 4.2.2,
// testdata/r/arima_refs.json). The log10 fit, R's loglik 353.96, gives the
// same raw-scale likelihood: the two differ by exactly n·log(ln 10)
// (REFERENCES.md).
func TestRawAICcJacobian(t *testing.T) {
	refs := loadRefs(t)
	y := refdata.Dataset(t, "AirPassengers")
	c, err := Select(y, Options{Period: 12, Transform: "log", Model: "0,1,1 x 0,1,1"})
	if err != nil {
		t.Fatal(err)
	}
	var sumLog float64
	for _, v := range y[13:] {
		sumLog += math.Log(v)
	}
	for _, id := range []string{"AirPassengers_log_airline", "AirPassengers_log10_airline"} {
		ref := refs[id]
		ll := ref.LogLik - sumLog
		if id == "AirPassengers_log10_airline" {
			ll -= float64(ref.NObs) * math.Log(math.Ln10)
		}
		want := -2*ll + 2*3 + 2*3*4/float64(ref.NObs-4)
		if math.Abs(c.RawAICc-want) > 0.02 {
			t.Errorf("raw AICc %.4f; from R's %s loglik %.4f", c.RawAICc, id, want)
		}
	}
}

// TestAirPassengersNotRaw: with the airline order fixed, the automatic
// transform choice leaves the raw scale for AirPassengers, whose seasonal
// swings grow with the level (Box & Jenkins 1976, Series G, model the log).
func TestAirPassengersNotRaw(t *testing.T) {
	y := refdata.Dataset(t, "AirPassengers")
	c, err := Select(y, Options{Period: 12, Transform: "auto", Model: "0,1,1 x 0,1,1"})
	if err != nil {
		t.Fatal(err)
	}
	if c.Transform.Name == transform.None {
		t.Errorf("chose %v; tried %+v", c.Transform, c.Tried)
	}
	if len(c.Tried) != 3 {
		t.Errorf("tried %d transforms, want none, log, boxcox", len(c.Tried))
	}
	for _, cd := range c.Tried {
		if cd.Err == "" && cd.AICc < c.RawAICc {
			t.Errorf("%+v beats the choice %v", cd, c.RawAICc)
		}
	}
}

// simulate returns n values of the seasonal ARIMA m (from its polynomials)
// driven by seeded N(0, σ²) noise, after a burn-in of 200, plus level.
func simulate(t testing.TB, m *arima.Model, n int, level float64, seed uint64) []float64 {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 0))
	s := m.Spec.Period
	// Expanded AR and MA polynomials of φ(B)Φ(B^s) and θ(B)Θ(B^s).
	ar := mulPoly(polyOf(m.AR, -1, 1), polyOf(m.SAR, -1, s))
	ma := mulPoly(polyOf(m.MA, 1, 1), polyOf(m.SMA, 1, s))
	burn := 200
	N := n + burn
	e := make([]float64, N)
	w := make([]float64, N)
	for i := range e {
		e[i] = rng.NormFloat64() * math.Sqrt(m.Sigma2)
		v := 0.0
		for j := 0; j < len(ma); j++ {
			if i-j >= 0 {
				v += ma[j] * e[i-j]
			}
		}
		for j := 1; j < len(ar); j++ {
			if i-j >= 0 {
				v -= ar[j] * w[i-j]
			}
		}
		w[i] = v
	}
	x := w[burn:]
	for k := 0; k < m.Spec.D; k++ {
		x = integrate(x, 1)
	}
	for k := 0; k < m.Spec.SD; k++ {
		x = integrate(x, s)
	}
	out := make([]float64, n)
	for i := range out {
		out[i] = x[i] + level
		if m.Spec.Mean {
			out[i] += m.Mean
		}
	}
	return out
}

func polyOf(c []float64, sign float64, lag int) []float64 {
	p := make([]float64, len(c)*lag+1)
	p[0] = 1
	for i, v := range c {
		p[(i+1)*lag] = sign * v
	}
	return p
}

func mulPoly(a, b []float64) []float64 {
	out := make([]float64, len(a)+len(b)-1)
	for i, x := range a {
		for j, y := range b {
			out[i+j] += x * y
		}
	}
	return out
}

func integrate(x []float64, lag int) []float64 {
	out := make([]float64, len(x))
	for i := range x {
		out[i] = x[i]
		if i >= lag {
			out[i] += out[i-lag]
		}
	}
	return out
}

// mustModel builds a model of orders "p,d,q[ x P,D,Q]" (seasonal orders
// with the given period) with or without a mean.
func mustModel(t testing.TB, orders string, period int, mean bool, params []float64, sigma2 float64) *arima.Model {
	t.Helper()
	ord, sord, seasonal, err := arima.ParseOrders(orders)
	if err != nil {
		t.Fatal(err)
	}
	c := arima.ConstantNone
	if !seasonal {
		period = 0
	}
	if mean {
		c = arima.ConstantMean
	}
	sp, err := arima.NewSpec(ord, sord, period, c)
	if err != nil {
		t.Fatal(err)
	}
	m, err := arima.NewModel(sp, params, sigma2)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestStepwiseOnKnownModels: on series simulated from known models the
// search finds the true differencing orders and a model at least as good
// (by AICc) as the true order, and every accepted fit it reports is no
// better than its choice (the search's own consistency).
func TestStepwiseOnKnownModels(t *testing.T) {
	cases := []struct {
		name     string
		model    *arima.Model
		n        int
		d, sd    int
		trueSpec string
	}{
		{"AR(2)", mustModel(t, "2,0,0", 0, true, []float64{0.6, -0.3, 10}, 1), 400, 0, 0, "2,0,0"},
		{"IMA(1,1)", mustModel(t, "0,1,1", 0, false, []float64{-0.5}, 1), 400, 1, 0, "0,1,1"},
		{"airline s=12", mustModel(t, "0,1,1 x 0,1,1", 12, false, []float64{-0.4, -0.6}, 1), 240, 1, 1, "0,1,1 x 0,1,1"},
	}
	for i, tc := range cases {
		y := simulate(t, tc.model, tc.n, 0, uint64(i+1))
		c, err := Select(y, Options{Period: tc.model.Spec.Period, Transform: "none"})
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		if c.Spec.D != tc.d || c.Spec.SD != tc.sd {
			t.Errorf("%s: chose %s, want d=%d D=%d", tc.name, c.Spec, tc.d, tc.sd)
		}
		truth, err := Select(y, Options{Period: tc.model.Spec.Period, Transform: "none", Model: tc.trueSpec})
		if err != nil {
			t.Fatalf("%s true spec: %v", tc.name, err)
		}
		if c.RawAICc > truth.RawAICc+1e-9 && c.Spec.D == tc.d && c.Spec.SD == tc.sd {
			t.Errorf("%s: chose %s AICc %.3f, the true order has %.3f", tc.name, c.Spec, c.RawAICc, truth.RawAICc)
		}
		for _, cd := range c.Tried {
			if cd.Err == "" && cd.AICc < c.RawAICc {
				t.Errorf("%s: tried %+v better than the choice %.3f", tc.name, cd, c.RawAICc)
			}
		}
		t.Logf("%s: chose %s (AICc %.2f; true order %.2f), %d fits", tc.name, c.Spec.String(), c.RawAICc, truth.RawAICc, len(c.Tried))
	}
}

// TestDeterministic: the same data give the same choice, fit for fit.
func TestDeterministic(t *testing.T) {
	y := refdata.Dataset(t, "USAccDeaths")
	a, err := Select(y, Options{Period: 12})
	if err != nil {
		t.Fatal(err)
	}
	b, err := Select(y, Options{Period: 12})
	if err != nil {
		t.Fatal(err)
	}
	if a.Spec != b.Spec || a.Transform != b.Transform || a.RawAICc != b.RawAICc || len(a.Tried) != len(b.Tried) {
		t.Fatalf("two runs differ: %s %v %v / %s %v %v", a.Spec, a.Transform, a.RawAICc, b.Spec, b.Transform, b.RawAICc)
	}
	for i := range a.Tried {
		ta, tb := a.Tried[i], b.Tried[i]
		if ta.Spec != tb.Spec || ta.Transform != tb.Transform || ta.Err != tb.Err || !(ta.AICc == tb.AICc || math.IsNaN(ta.AICc) && math.IsNaN(tb.AICc)) {
			t.Errorf("fit %d differs: %+v / %+v", i, ta, tb)
		}
	}
}

// TestWarm: a warm refit from the cold choice, on the same data, keeps the
// order (spec, mean and drift), the transform and the likelihood, with at
// most five fits (a property: the cold choice is the best of its
// neighbourhood, and the warm search tries only that neighbourhood).
func TestWarm(t *testing.T) {
	y := refdata.Dataset(t, "USAccDeaths")
	cold, err := Select(y, Options{Period: 12})
	if err != nil {
		t.Fatal(err)
	}
	w := &Warm{Spec: cold.Spec, Params: cold.Result.Model.Params(), Transform: cold.Transform}
	warm, err := Select(y, Options{Period: 12, Warm: w})
	if err != nil {
		t.Fatal(err)
	}
	if len(warm.Tried) > 5 {
		t.Errorf("warm refit tried %d fits, want ≤ 5", len(warm.Tried))
	}
	if warm.Spec != cold.Spec {
		t.Errorf("warm refit chose %v (%+v), cold %v (%+v): the order changed", warm.Spec, warm.Spec, cold.Spec, cold.Spec)
	}
	if warm.Transform.String() != cold.Transform.String() {
		t.Errorf("warm refit transform %v, cold %v", warm.Transform, cold.Transform)
	}
	if d := warm.Result.LogLik - cold.Result.LogLik; math.Abs(d) > 0.01 {
		t.Errorf("warm loglik %.4f, cold %.4f", warm.Result.LogLik, cold.Result.LogLik)
	}
	t.Logf("cold %v %v loglik %.4f AICc %.4f; warm loglik %.4f AICc %.4f in %d fits",
		cold.Spec, cold.Transform, cold.Result.LogLik, cold.RawAICc, warm.Result.LogLik, warm.RawAICc, len(warm.Tried))
	if warm.RawAICc > cold.RawAICc+0.01 {
		t.Errorf("warm AICc %.4f worse than cold %.4f", warm.RawAICc, cold.RawAICc)
	}
	// A warm transform that no longer applies falls back to a cold choice.
	neg := append([]float64(nil), y...)
	neg[10] = -1
	w2 := &Warm{Spec: cold.Spec, Params: w.Params, Transform: transform.Transform{Name: transform.Log}}
	c, err := Select(neg, Options{Period: 12, Warm: w2})
	if err != nil {
		t.Fatal(err)
	}
	if c.Transform.Name == transform.Log || c.Transform.Name == transform.BoxCox {
		t.Errorf("transform %v on a series with a negative value", c.Transform)
	}
}

func TestAdjustStart(t *testing.T) {
	from := arima.Spec{P: 2, Q: 1, SQ: 1, D: 1, SD: 1, Period: 12}
	to := arima.Spec{P: 1, Q: 2, SQ: 1, D: 1, SD: 1, Period: 12}
	got := adjustStart([]float64{0.5, -0.2, 0.3, -0.6}, from, to)
	want := []float64{0.5, 0.3, 0, -0.6}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("adjustStart = %v, want %v", got, want)
	}
	if adjustStart([]float64{1}, from, to) != nil {
		t.Error("a start of the wrong length must give nil")
	}
}

// TestMinRootModulus checks the root moduli on polynomials worked by hand.
func TestMinRootModulus(t *testing.T) {
	cases := []struct {
		c    []float64
		sign float64
		want float64
	}{
		{[]float64{1.3, -0.4}, -1, 1.25},      // 1 − 1.3z + 0.4z² = (1 − 0.5z)(1 − 0.8z): roots 2, 1.25
		{[]float64{0, 0.25}, 1, 2},            // 1 + 0.25z²: roots ±2i
		{[]float64{-0.9995}, 1, 1 / 0.9995},   // 1 − 0.9995z
		{[]float64{0.5, 0, 0}, -1, 2},         // trailing zeros ignored
		{nil, 1, math.Inf(1)},                 // no polynomial, no root
		{[]float64{0, 0, 0, 0.0625}, -1, 2.0}, // 1 − z⁴/16: |z| = 2
	}
	for _, tc := range cases {
		if got := minRootModulus(tc.c, tc.sign); math.Abs(got-tc.want) > 1e-9*math.Max(1, tc.want) && got != tc.want {
			t.Errorf("minRootModulus(%v, %v) = %v, want %v", tc.c, tc.sign, got, tc.want)
		}
	}
}

// TestConcaveGrowth: scaled-exp is tried for a saturating rise and not for
// a straight line or a convex rise (the package's documented rule).
func TestConcaveGrowth(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 0))
	mk := func(f func(float64) float64) []float64 {
		y := make([]float64, 200)
		for i := range y {
			y[i] = f(float64(i)) + 0.05*rng.NormFloat64()
		}
		return y
	}
	if !concaveGrowth(mk(func(t float64) float64 { return math.Log(1 + t) })) {
		t.Error("log growth not seen as concave")
	}
	if concaveGrowth(mk(func(t float64) float64 { return 0.01 * t })) {
		t.Error("a line seen as concave")
	}
	if concaveGrowth(mk(func(t float64) float64 { return 1e-4 * t * t })) {
		t.Error("convex growth seen as concave")
	}
}

func TestErrors(t *testing.T) {
	y := refdata.Dataset(t, "Nile")
	neg := append([]float64(nil), y...)
	neg[3] = -5
	cases := []struct {
		name string
		y    []float64
		o    Options
		want error
	}{
		{"negative period", y, Options{Period: -1}, ErrBadOptions},
		{"negative bound", y, Options{MaxP: -1}, ErrBadOptions},
		{"unknown transform", y, Options{Transform: "sqrt"}, ErrBadOptions},
		{"bad model", y, Options{Model: "1,1"}, ErrBadOptions},
		{"old spelling", y, Options{Model: "ARIMA(1,1,1)"}, ErrBadOptions},
		{"seasonal orders without a period", y, Options{Model: "0,1,1 x 0,1,1"}, ErrBadOptions},
		{"mean with d = 1", y, Options{Model: "0,1,1", Constant: arima.ConstantMean}, ErrBadOptions},
		{"drift with the search", y, Options{Constant: arima.ConstantDrift}, ErrBadOptions},
		{"unknown constant", y, Options{Constant: arima.Constant(7)}, ErrBadOptions},
		{"short", y[:5], Options{}, ErrTooShort},
		{"log of a negative value", neg, Options{Transform: "log"}, ErrDomain},
		{"infinite value", append([]float64{math.Inf(1)}, y...), Options{}, ErrDomain},
		{"all missing", []float64{math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()}, Options{}, ErrTooShort},
	}
	for _, tc := range cases {
		if _, err := Select(tc.y, tc.o); !errors.Is(err, tc.want) {
			t.Errorf("%s: %v, want %v", tc.name, err, tc.want)
		}
	}
}

func ExampleSelect() {
	// R `datasets` LakeHuron, 1875–1972 (first 20 of 98 annual levels, feet).
	y := []float64{580.38, 581.86, 580.97, 580.8, 579.79, 580.39, 580.42, 580.82, 581.4, 581.32,
		581.44, 581.68, 581.17, 580.53, 580.01, 579.91, 579.14, 579.16, 579.55, 579.67}
	c, err := Select(y, Options{Transform: "none", Model: "1,0,0"})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(c.Spec.String(), c.Transform.String(), len(c.Tried), "fit")
	// Output:
	// ARIMA 1,0,0 + mean none 1 fit
}

// TestScaledExpCandidate: a saturating rise, x = 10·log(1 + t/20) plus
// seeded AR(1) noise, makes scaled-exp a candidate (package doc, step 1),
// fitted at the same differencing orders as the others.
func TestScaledExpCandidate(t *testing.T) {
	m := mustModel(t, "1,0,0", 0, false, []float64{0.5}, 0.01)
	y := simulate(t, m, 300, 0, 11)
	for i := range y {
		y[i] += 10 * math.Log(1+float64(i)/20)
	}
	c, err := Select(y, Options{})
	if err != nil {
		t.Fatal(err)
	}
	seen := false
	for _, cd := range c.Tried {
		if cd.Transform == "scaled-exp" {
			seen = true
		}
	}
	if !seen {
		t.Errorf("scaled-exp not tried; tried %+v", c.Tried)
	}
	for _, cd := range c.Tried {
		sp := cd.Spec
		if sp.D != c.Spec.D || sp.SD != c.Spec.SD {
			t.Errorf("candidate %s at other differencing orders than the choice %s", cd.Spec, c.Spec)
		}
	}
	t.Logf("chose %s %s", c.Spec, c.Transform)
}

// TestMissingValues: R's AirPassengers with six NA holes
// (testdata/r/arima_refs.R) still gets seasonal and first differences
// (D = 1 and d = 1, as the airline model of Box & Jenkins 1976, Series G).
func TestMissingValues(t *testing.T) {
	y := refdata.Dataset(t, "AirPassengers_na")
	c, err := Select(y, Options{Period: 12})
	if err != nil {
		t.Fatal(err)
	}
	if c.Spec.SD != 1 || c.Spec.D != 1 {
		t.Errorf("chose %s, want d = 1, D = 1", c.Spec)
	}
	if c.Result.NObs != 144-6-13 {
		t.Errorf("nobs %d, want 125 (R 4.2.2, testdata/r/arima_refs.json AirPassengers_na_log_airline)", c.Result.NObs)
	}
}

// A fixed order whose fit has a root at the unit circle is kept, with the
// finding in its note: the root rule only steers the automatic search. A
// linear trend plus white noise, differenced once, is an MA(1) with θ = −1
// (over-differencing; common practice), so 0,1,1 with a drift lands
// there.
func TestFixedOrderKeepsUnitRootFit(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 3))
	y := make([]float64, 120)
	for i := range y {
		y[i] = 100 + 0.5*float64(i) + r.NormFloat64()
	}
	c, err := Select(y, Options{Transform: "none", Model: "0,1,1", Constant: arima.ConstantDrift})
	if err != nil {
		t.Fatalf("fixed 0,1,1 with a drift on trend plus noise: %v", err)
	}
	ma := c.Result.Model.MA[0]
	if ma > -0.99 {
		t.Fatalf("ma1 = %.4f: the over-differenced fit did not reach the unit circle", ma)
	}
	if !strings.Contains(c.Result.Note, "unit circle") {
		t.Fatalf("ma1 = %.4f but the note %q does not report the root", ma, c.Result.Note)
	}
}

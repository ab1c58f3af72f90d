package stationarity

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"forewarn/engine/internal/refdata"
)

// The series are those of R 4.2.2 `datasets`, exported to
// testdata/datasets/NAME.csv by testdata/r/stationarity_datasets.R (NA becomes
// NaN) and read with refdata.Dataset; reference values are read with
// refdata.JSON.

// series returns the named case of testdata/py/stationarity_refs.py.
func series(t *testing.T, name string, takeLog bool) []float64 {
	file := name
	if takeLog {
		file = "AirPassengers"
	}
	x := refdata.Dataset(t, file)
	if takeLog {
		for i := range x {
			x[i] = math.Log(x[i])
		}
	}
	return x
}

func regression(t *testing.T, s string) Regression {
	switch s {
	case "c":
		return Constant
	case "ct":
		return Trend
	}
	t.Fatalf("regression %q", s)
	return 0
}

type pyRefs struct {
	Library string
	ADF     []struct {
		Series, Regression   string
		Log                  bool
		Lags, Usedlag, Nobs  int
		Stat, Pvalue         float64
		Crit1, Crit5, Crit10 float64
	}
	KPSS []struct {
		Series, Regression            string
		Log                           bool
		Nlags, Usedlag                int
		Stat, Pvalue                  float64
		Crit10, Crit5, Crit2_5, Crit1 float64
	}
	MacKinnonP []struct {
		Regression  string
		Tau, Pvalue float64
	}
	MacKinnonCrit []struct {
		Regression           string
		Nobs                 int
		Crit1, Crit5, Crit10 float64
	}
	NDiffs []struct {
		Series  string
		Log     bool
		D       int
		Pvalues []float64
	}
}

func loadPyRefs(t *testing.T) pyRefs {
	var r pyRefs
	refdata.JSON(t, "py/stationarity_refs.json", &r)
	if len(r.ADF) == 0 || len(r.KPSS) == 0 {
		t.Fatal("no reference cases")
	}
	return r
}

// ADF against statsmodels 0.13.5 adfuller(x, maxlag=k, autolag=None, regression=c|ct) on
// Nile, LakeHuron, lynx, log AirPassengers, austres and WWWusage (R 4.2.2 `datasets`);
// values written by testdata/py/stationarity_refs.py. Statistic to 1e-6 (relative to
// max(1, |τ|)), p-value to 1e-3, critical values to 1e-9.
func TestADFStatsmodels(t *testing.T) {
	refs := loadPyRefs(t)
	for _, c := range refs.ADF {
		res, err := ADF(series(t, c.Series, c.Log), c.Lags, regression(t, c.Regression))
		if err != nil {
			t.Fatalf("%s %s k=%d: %v", c.Series, c.Regression, c.Lags, err)
		}
		if math.Abs(res.Stat-c.Stat) > 1e-6*math.Max(1, math.Abs(c.Stat)) {
			t.Errorf("%s %s k=%d: stat %.10g, statsmodels %.10g", c.Series, c.Regression, c.Lags, res.Stat, c.Stat)
		}
		if math.Abs(res.PValue-c.Pvalue) > 1e-3 {
			t.Errorf("%s %s k=%d: p %.6g, statsmodels %.6g", c.Series, c.Regression, c.Lags, res.PValue, c.Pvalue)
		}
		if res.Lags != c.Usedlag || res.NObs != c.Nobs {
			t.Errorf("%s %s k=%d: lags %d nobs %d, statsmodels %d %d", c.Series, c.Regression, c.Lags, res.Lags, res.NObs, c.Usedlag, c.Nobs)
		}
		for _, p := range [][2]float64{{res.Crit1, c.Crit1}, {res.Crit5, c.Crit5}, {res.Crit10, c.Crit10}} {
			if math.Abs(p[0]-p[1]) > 1e-9 {
				t.Errorf("%s %s k=%d: critical value %v, statsmodels %v", c.Series, c.Regression, c.Lags, p[0], p[1])
			}
		}
	}
}

// MacKinnon (1994) p-values against statsmodels 0.13.5 mackinnonp(τ, N=1) on τ = −6, −5.75, …, 3.
func TestMacKinnonP(t *testing.T) {
	for _, c := range loadPyRefs(t).MacKinnonP {
		if got := MacKinnonP(c.Tau, regression(t, c.Regression)); math.Abs(got-c.Pvalue) > 1e-12 {
			t.Errorf("%s τ=%v: p %v, statsmodels %v", c.Regression, c.Tau, got, c.Pvalue)
		}
	}
}

// MacKinnon (2010) critical values: the T → ∞ values equal the published table
// (REFERENCES.md: c −3.43035, −2.86154, −2.56677; ct −3.95877, −3.41049, −3.12705), and the
// finite-T surface equals statsmodels 0.13.5 mackinnoncrit(N=1, nobs=T).
func TestMacKinnonCrit(t *testing.T) {
	for _, c := range []struct {
		reg         Regression
		c1, c5, c10 float64
	}{{Constant, -3.43035, -2.86154, -2.56677}, {Trend, -3.95877, -3.41049, -3.12705}} {
		c1, c5, c10 := MacKinnonCrit(c.reg, 0)
		if c1 != c.c1 || c5 != c.c5 || c10 != c.c10 {
			t.Errorf("%v asymptotic: %v %v %v", c.reg, c1, c5, c10)
		}
	}
	for _, c := range loadPyRefs(t).MacKinnonCrit {
		c1, c5, c10 := MacKinnonCrit(regression(t, c.Regression), c.Nobs)
		if math.Abs(c1-c.Crit1) > 1e-12 || math.Abs(c5-c.Crit5) > 1e-12 || math.Abs(c10-c.Crit10) > 1e-12 {
			t.Errorf("%s T=%d: %v %v %v, statsmodels %v %v %v", c.Regression, c.Nobs, c1, c5, c10, c.Crit1, c.Crit5, c.Crit10)
		}
	}
}

// KPSS against statsmodels 0.13.5 kpss(x, regression=c|ct, nlags=k) with k = 0, 3, 8 and
// "legacy" (nlags −1 here), same six series. Statistic to 1e-6 relative, p-value to 1e-3,
// critical values equal to Kwiatkowski et al. (1992) Table 1 (REFERENCES.md).
func TestKPSSStatsmodels(t *testing.T) {
	for _, c := range loadPyRefs(t).KPSS {
		reg := regression(t, c.Regression)
		res, err := KPSS(series(t, c.Series, c.Log), reg, c.Nlags)
		if err != nil {
			t.Fatalf("%s %s k=%d: %v", c.Series, c.Regression, c.Nlags, err)
		}
		if math.Abs(res.Stat-c.Stat) > 1e-6*math.Max(1, math.Abs(c.Stat)) {
			t.Errorf("%s %s k=%d: stat %.10g, statsmodels %.10g", c.Series, c.Regression, c.Nlags, res.Stat, c.Stat)
		}
		if math.Abs(res.PValue-c.Pvalue) > 1e-3 || res.Lags != c.Usedlag {
			t.Errorf("%s %s k=%d: p %v lags %d, statsmodels %v %d", c.Series, c.Regression, c.Nlags, res.PValue, res.Lags, c.Pvalue, c.Usedlag)
		}
		if res.Crit10 != c.Crit10 || res.Crit5 != c.Crit5 || res.Crit2_5 != c.Crit2_5 || res.Crit1 != c.Crit1 {
			t.Errorf("%s %s: critical values %+v", c.Series, c.Regression, res)
		}
	}
	// Table 1 of Kwiatkowski et al. (1992), as printed.
	lv, _ := KPSS(refdata.Dataset(t, "Nile"), Constant, 4)
	tr, _ := KPSS(refdata.Dataset(t, "Nile"), Trend, 4)
	if lv.Crit10 != 0.347 || lv.Crit5 != 0.463 || lv.Crit2_5 != 0.574 || lv.Crit1 != 0.739 ||
		tr.Crit10 != 0.119 || tr.Crit5 != 0.146 || tr.Crit2_5 != 0.176 || tr.Crit1 != 0.216 {
		t.Errorf("critical values %+v %+v", lv, tr)
	}
}

// Ljung–Box against R 4.2.2 Box.test(x, lag, type = "Ljung-Box", fitdf), values and inputs
// written by testdata/r/boxtest.R, including a series with six NAs (presidents). Q to 1e-9
// relative; p to 1e-9 absolute (R prints 1 − pchisq, which is 0 below ≈ 1e-16).
func TestLjungBoxR(t *testing.T) {
	var refs struct {
		Cases []struct {
			Name           string
			Lag, Fitdf, Df int
			Q, P           float64
			X              []*float64
		}
	}
	refdata.JSON(t, "r/boxtest.json", &refs)
	if len(refs.Cases) == 0 {
		t.Fatal("no cases")
	}
	for _, c := range refs.Cases {
		x := make([]float64, len(c.X))
		for i, v := range c.X {
			x[i] = math.NaN()
			if v != nil {
				x[i] = *v
			}
		}
		q, p, err := LjungBox(x, c.Lag, c.Fitdf)
		if err != nil {
			t.Fatalf("%s: %v", c.Name, err)
		}
		if math.Abs(q-c.Q) > 1e-9*c.Q || math.Abs(p-c.P) > 1e-9 {
			t.Errorf("%s lag %d fitdf %d: Q %.12g p %.6g, R %.12g %.6g", c.Name, c.Lag, c.Fitdf, q, p, c.Q, c.P)
		}
	}
}

// Seasonal strength from the classical decomposition against R 4.2.2 decompose (values by
// testdata/r/seasonal_strength.R), to 1e-9.
func TestSeasonalStrengthR(t *testing.T) {
	var refs struct {
		Cases []struct {
			Name     string
			Period   int
			Strength float64
		}
	}
	refdata.JSON(t, "r/seasonal_strength.json", &refs)
	inputs := map[string][]float64{
		"log(AirPassengers)": series(t, "AirPassengers", true),
		"AirPassengers":      refdata.Dataset(t, "AirPassengers"),
		"USAccDeaths":        refdata.Dataset(t, "USAccDeaths"),
		"austres":            refdata.Dataset(t, "austres"),
	}
	for _, c := range refs.Cases {
		x, ok := inputs[c.Name]
		if !ok {
			t.Fatalf("no input for %q", c.Name)
		}
		got, err := SeasonalStrength(x, c.Period)
		if err != nil || math.Abs(got-c.Strength) > 1e-9 {
			t.Errorf("%s: strength %v, %v; R decompose %v", c.Name, got, err, c.Strength)
		}
	}
}

// NDiffs: a stationary AR(1) needs no difference, a random walk one, an integrated random
// walk two (their orders of integration by construction; seeded). log AirPassengers:
// KPSS rejects level stationarity (statsmodels kpss p = 0.01 in the reference file), and its
// first difference is taken as stationary.
func TestNDiffs(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	n := 400
	ar, rw, i2 := make([]float64, n), make([]float64, n), make([]float64, n)
	for t := 1; t < n; t++ {
		e := rng.NormFloat64()
		ar[t] = 0.5*ar[t-1] + e
		rw[t] = rw[t-1] + e
		i2[t] = i2[t-1] + rw[t]
	}
	for _, c := range []struct {
		name string
		x    []float64
		want int
	}{{"AR(1)", ar, 0}, {"random walk", rw, 1}, {"I(2)", i2, 2}, {"log AirPassengers", series(t, "AirPassengers", true), 1}} {
		d, err := NDiffs(c.x, 0.05, 2)
		if err != nil || d != c.want {
			t.Errorf("%s: d = %d, %v; want %d", c.name, d, err, c.want)
		}
	}
	if d, err := NDiffs(i2, 0.05, 1); d != 1 || err != nil {
		t.Errorf("maxD 1: %d, %v", d, err)
	}
	if _, err := NDiffs(ar, 0.2, 2); !errors.Is(err, ErrBadArgument) {
		t.Errorf("alpha 0.2: %v", err)
	}
}

// NDiffs against successive statsmodels 0.13.5 kpss(y, regression="c", nlags=⌊4(n/100)^{1/4}⌋)
// tests at 5 % on the six reference series (testdata/py/stationarity_refs.py): d = 0, 1 and 2
// all occur.
func TestNDiffsStatsmodels(t *testing.T) {
	refs := loadPyRefs(t)
	if len(refs.NDiffs) == 0 {
		t.Fatal("no ndiffs cases")
	}
	for _, c := range refs.NDiffs {
		if d, err := NDiffs(series(t, c.Series, c.Log), 0.05, 2); err != nil || d != c.D {
			t.Errorf("%s: d = %d, %v; statsmodels KPSS sequence %v gives %d", c.Series, d, err, c.Pvalues, c.D)
		}
	}
}

// NSDiffs: strength of log AirPassengers and USAccDeaths is 0.93 (R decompose above), over
// the 0.64 threshold; austres (0.27) is below it.
func TestNSDiffs(t *testing.T) {
	for _, c := range []struct {
		name string
		x    []float64
		s    int
		want int
	}{
		{"log AirPassengers", series(t, "AirPassengers", true), 12, 1},
		{"USAccDeaths", refdata.Dataset(t, "USAccDeaths"), 12, 1},
		{"austres", refdata.Dataset(t, "austres"), 4, 0},
	} {
		if d, err := NSDiffs(c.x, c.s, 1); err != nil || d != c.want {
			t.Errorf("%s: D = %d, %v; want %d", c.name, d, err, c.want)
		}
	}
}

func TestBadInput(t *testing.T) {
	nile := refdata.Dataset(t, "Nile")
	withNaN := append([]float64{math.NaN()}, nile...)
	if _, err := ADF(withNaN, 1, Constant); !errors.Is(err, ErrMissing) {
		t.Errorf("ADF NaN: %v", err)
	}
	if _, err := KPSS(withNaN, Constant, 1); !errors.Is(err, ErrMissing) {
		t.Errorf("KPSS NaN: %v", err)
	}
	if _, err := ADF(nile[:10], 4, Trend); !errors.Is(err, ErrTooShort) {
		t.Errorf("ADF short: %v", err)
	}
	if _, err := ADF(nile, 1, Regression(7)); !errors.Is(err, ErrBadArgument) {
		t.Errorf("ADF regression: %v", err)
	}
	if _, err := ADF(make([]float64, 50), 1, Constant); err == nil {
		t.Error("ADF constant series: no error")
	}
	if _, err := KPSS(nile, Constant, len(nile)); !errors.Is(err, ErrTooShort) {
		t.Errorf("KPSS lags ≥ n: %v", err)
	}
	if _, err := KPSS([]float64{3, 3, 3, 3}, Constant, 1); !errors.Is(err, ErrConstant) {
		t.Errorf("KPSS constant: %v", err)
	}
	if _, _, err := LjungBox(nile, 5, 5); !errors.Is(err, ErrBadArgument) {
		t.Errorf("LjungBox df 0: %v", err)
	}
	if _, _, err := LjungBox(nile[:5], 5, 0); !errors.Is(err, ErrTooShort) {
		t.Errorf("LjungBox short: %v", err)
	}
	if _, err := SeasonalStrength(nile[:20], 12); !errors.Is(err, ErrTooShort) {
		t.Errorf("SeasonalStrength short: %v", err)
	}
	gappy := append([]float64(nil), nile[:24]...)
	for i := 0; i < 24; i += 4 {
		gappy[i] = math.NaN() // cycle position 0 of period 4 never defined
	}
	if f, err := SeasonalStrength(gappy, 4); !errors.Is(err, ErrTooShort) {
		t.Errorf("SeasonalStrength with an undefined cycle position: %v, %v", f, err)
	}
	if _, err := SeasonalStrength(nile, 1); !errors.Is(err, ErrBadArgument) {
		t.Errorf("SeasonalStrength period 1: %v", err)
	}
	// ADF's default lag: ⌈12·(n/100)^{1/4}⌉ = 12 for Nile's n = 100 (Schwert 1989).
	if res, err := ADF(nile, -1, Constant); err != nil || res.Lags != 12 {
		t.Errorf("ADF default lags: %+v, %v", res, err)
	}
}

func BenchmarkADF(b *testing.B) {
	x := benchSeries(2000)
	b.ReportAllocs()
	for b.Loop() {
		_, _ = ADF(x, 12, Trend)
	}
}

func BenchmarkKPSS(b *testing.B) {
	x := benchSeries(2000)
	b.ReportAllocs()
	for b.Loop() {
		_, _ = KPSS(x, Constant, -1)
	}
}

func BenchmarkNDiffs(b *testing.B) {
	x := benchSeries(2000)
	b.ReportAllocs()
	for b.Loop() {
		_, _ = NDiffs(x, 0.05, 2)
	}
}

func BenchmarkSeasonalStrength(b *testing.B) {
	x := benchSeries(2000)
	b.ReportAllocs()
	for b.Loop() {
		_, _ = SeasonalStrength(x, 24)
	}
}

// benchSeries is a seeded hourly-like series: a random walk plus a daily cycle.
func benchSeries(n int) []float64 {
	rng := rand.New(rand.NewPCG(1, 1))
	x := make([]float64, n)
	level := 100.0
	for t := range x {
		level += rng.NormFloat64()
		x[t] = level + 10*math.Sin(2*math.Pi*float64(t)/24)
	}
	return x
}

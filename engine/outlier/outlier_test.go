package outlier

import (
	"math"
	"math/rand/v2"
	"testing"

	"forewarn/engine/arima"
	"forewarn/engine/internal/refdata"
)

// refs is testdata/r/outlier_refs.json, written by testdata/r/outlier_refs.R
// (R 4.2.2 stats::arima, ARMAtoMA; R forecast 8.20 tsoutliers()).
type refs struct {
	PiARIMA111 []float64 `json:"pi_arima111"`
	PiAirline  []float64 `json:"pi_airline"`
	NileLS     struct {
		Coef   []float64 `json:"coef"`
		LogLik float64   `json:"loglik"`
		SE     []float64 `json:"se"`
	} `json:"nile_ls"`
	Forecast struct {
		Nile struct{ Index []int } `json:"Nile"`
		Gold struct{ Index []int } `json:"gold"`
	} `json:"forecast_tsoutliers"`
}

func loadRefs(t *testing.T) refs {
	var r refs
	refdata.JSON(t, "r/outlier_refs.json", &r)
	return r
}

func model(t testing.TB, s arima.Spec, p []float64) *arima.Model {
	m, err := arima.NewModel(s, p, 1)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// π weights against R 4.2.2 ARMAtoMA (testdata/r/outlier_refs.json).
func TestWeightsMatchR(t *testing.T) {
	r := loadRefs(t)
	for _, c := range []struct {
		name string
		m    *arima.Model
		want []float64
	}{
		{"arima111", model(t, arima.Spec{P: 1, D: 1, Q: 1}, []float64{0.5, -0.3}), r.PiARIMA111},
		{"airline", model(t, arima.Spec{D: 1, Q: 1, SD: 1, SQ: 1, Period: 12}, []float64{-0.4, -0.6}), r.PiAirline},
	} {
		got := Weights(c.m, len(c.want))
		for i, w := range c.want {
			if math.Abs(got[i]-w) > 1e-12 {
				t.Errorf("%s: π_%d = %v, R %v", c.name, i, got[i], w)
			}
		}
	}
}

// Nile (R datasets) under white noise with a mean: the procedure finds the
// classic level shift at 1899 (index 28) and the additive outlier at 1913
// (index 42); the final fit equals R 4.2.2 stats::arima(Nile, c(0,0,0),
// xreg = cbind(step at 1899, pulse at 1913)) to 0.01 in log-likelihood and
// coefficients (testdata/r/outlier_refs.json). R forecast 8.20
// tsoutliers() flags nothing on Nile: its robust decomposition follows the
// shift (the method looks for isolated values only).
func TestNileMatchesR(t *testing.T) {
	r := loadRefs(t)
	y := refdata.Dataset(t, "Nile")
	res, err := Detect(y, nil, arima.Spec{Mean: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Outliers) != 2 || res.Outliers[0].Kind != LS || res.Outliers[0].Index != 28 || res.Outliers[1].Kind != AO || res.Outliers[1].Index != 42 {
		t.Fatalf("found %+v, want LS at 28 (1899) and AO at 42 (1913)", res.Outliers)
	}
	m := res.Fit.Model
	got := []float64{m.Mean, m.Beta[0], m.Beta[1]}
	for i, w := range r.NileLS.Coef {
		if math.Abs(got[i]-w) > 0.01 {
			t.Errorf("coefficient %d = %.4f, R %.4f", i, got[i], w)
		}
	}
	if math.Abs(res.Fit.LogLik-r.NileLS.LogLik) > 0.01 {
		t.Errorf("loglik %.4f, R %.4f", res.Fit.LogLik, r.NileLS.LogLik)
	}
	t.Logf("Nile: %+v; R forecast tsoutliers: %v", res.Outliers, r.Forecast.Nile.Index)
	if len(r.Forecast.Nile.Index) != 0 {
		t.Errorf("R forecast tsoutliers flagged %v on Nile; the comparison expects none", r.Forecast.Nile.Index)
	}
}

// gold (R forecast 8.20, daily gold prices with 34 missing values) under
// ARIMA(0,1,1): the spike R forecast 8.20 tsoutliers() flags (index 769)
// is found as an additive outlier, the largest |τ| of all.
func TestGoldSpikeAsR(t *testing.T) {
	r := loadRefs(t)
	y := refdata.Dataset(t, "gold")
	res, err := Detect(y, nil, arima.Spec{D: 1, Q: 1}, nil)
	if err != nil {
		t.Fatal(err)
	}
	var top Outlier
	for _, o := range res.Outliers {
		if math.Abs(o.Tau) > math.Abs(top.Tau) {
			top = o
		}
	}
	t.Logf("gold: C %.2f, %d effects %+v; R forecast tsoutliers: %v", res.Critical, len(res.Outliers), res.Outliers, r.Forecast.Gold.Index)
	for _, i := range r.Forecast.Gold.Index {
		if top.Index != i || top.Kind != AO {
			t.Errorf("largest effect %+v, R forecast tsoutliers flags %d", top, i)
		}
	}
}

// Detection rates on seeded simulations with known truth (property test):
// an effect of 5σ (TC: 5σ) at index 100 of n = 200 (ARIMA(1,1,1)) or at
// 96 of 144 (airline model, s = 12), default C. A true positive is the
// right kind at the right index (±1 for LS and TC); every other effect is
// a false positive. Bounds: common practice for 5σ effects (Chen & Liu
// 1993, Table 3, report detection near 90 % and above for effects of this
// size at C = 3); ours are stated here and checked. False positives: about
// 3n tests at |τ| ≥ C ≈ 3.2–3.4, a Gaussian tail near 1e-3 each, so up to
// 0.8 spurious effects per series is allowed.
func TestDetectionRates(t *testing.T) {
	reps := 200
	if testing.Short() {
		reps = 40
	}
	type cs struct {
		name    string
		spec    arima.Spec
		params  []float64
		n, at   int
		kind    Kind
		minTP   float64
		maxFPer float64 // false positives per series
	}
	cases := []cs{
		{"arima111 AO", arima.Spec{P: 1, D: 1, Q: 1}, []float64{0.5, -0.3}, 200, 100, AO, 0.9, 0.8},
		{"arima111 LS", arima.Spec{P: 1, D: 1, Q: 1}, []float64{0.5, -0.3}, 200, 100, LS, 0.6, 0.8},
		{"arima111 TC", arima.Spec{P: 1, D: 1, Q: 1}, []float64{0.5, -0.3}, 200, 100, TC, 0.6, 0.8},
		{"airline AO", arima.Spec{D: 1, Q: 1, SD: 1, SQ: 1, Period: 12}, []float64{-0.4, -0.6}, 144, 96, AO, 0.9, 0.8},
		{"airline LS", arima.Spec{D: 1, Q: 1, SD: 1, SQ: 1, Period: 12}, []float64{-0.4, -0.6}, 144, 96, LS, 0.6, 0.8},
		{"none arima111", arima.Spec{P: 1, D: 1, Q: 1}, []float64{0.5, -0.3}, 200, -1, AO, 0, 0.8},
	}
	for _, c := range cases {
		m := model(t, c.spec, c.params)
		tp, fp := 0, 0
		for seed := uint64(1); seed <= uint64(reps); seed++ {
			y := simulate(m, c.n, seed)
			if c.at >= 0 {
				col := Column(c.kind, c.at, c.n, Delta)
				for i := range y {
					y[i] += 5 * col[i]
				}
			}
			res, err := Detect(y, nil, c.spec, nil)
			if err != nil {
				t.Fatalf("%s seed %d: %v", c.name, seed, err)
			}
			hit := false
			for _, o := range res.Outliers {
				tol := 0
				if c.kind != AO {
					tol = 1
				}
				if !hit && c.at >= 0 && o.Kind == c.kind && abs(o.Index-c.at) <= tol {
					hit = true
					continue
				}
				fp++
			}
			if hit {
				tp++
			}
		}
		tpr, fpr := float64(tp)/float64(reps), float64(fp)/float64(reps)
		t.Logf("%-14s n=%d C=%.2f reps %d: true-positive rate %.3f, false positives per series %.3f", c.name, c.n, CriticalValue(c.n), reps, tpr, fpr)
		if c.at >= 0 && tpr < c.minTP {
			t.Errorf("%s: true-positive rate %.3f < %.2f", c.name, tpr, c.minTP)
		}
		if fpr > c.maxFPer {
			t.Errorf("%s: %.3f false positives per series > %.2f", c.name, fpr, c.maxFPer)
		}
	}
}

func abs(i int) int {
	if i < 0 {
		return -i
	}
	return i
}

// simulate draws n values of m with unit-σ innovations after a burn-in
// (ARMA part by its difference equation, then integrated).
func simulate(m *arima.Model, n int, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, seed^0x5851f42d4c957f2d))
	s := m.Spec
	num := polyMul(arPoly(m.AR, 1), arPoly(m.SAR, s.Period)) // 1 − Σφ
	den := polyMul(maPoly(m.MA, 1), maPoly(m.SMA, s.Period))
	burn := 300
	tot := n + burn
	e, w := make([]float64, tot), make([]float64, tot)
	for t := range e {
		e[t] = rng.NormFloat64()
		v := e[t]
		for j := 1; j < len(den) && j <= t; j++ {
			v += den[j] * e[t-j]
		}
		for j := 1; j < len(num) && j <= t; j++ {
			v -= num[j] * w[t-j]
		}
		w[t] = v
	}
	y := w[burn:]
	for i := 0; i < s.D; i++ {
		for t := 1; t < n; t++ {
			y[t] += y[t-1]
		}
	}
	for i := 0; i < s.SD; i++ {
		for t := s.Period; t < n; t++ {
			y[t] += y[t-s.Period]
		}
	}
	return append([]float64(nil), y...)
}

// Bad input gives a clear error.
func TestDetectRejectsBadInput(t *testing.T) {
	y := refdata.Dataset(t, "Nile")
	for _, o := range []Options{{Critical: -1}, {Delta: 1.5}, {Kinds: []Kind{7}}, {From: -1}, {From: len(y) + 1},
		{Known: []Outlier{{Kind: LS, Index: len(y)}}}, {Known: []Outlier{{Kind: 9, Index: 3}}},
		{Known: []Outlier{{Kind: AO, Index: 3}, {Kind: LS, Index: 3}}}} {
		if _, err := Detect(y, nil, arima.Spec{Mean: true}, &o); err == nil {
			t.Errorf("%+v accepted", o)
		}
	}
	if _, err := Detect(y, nil, arima.Spec{Mean: true, NX: 1}, nil); err == nil {
		t.Error("NX without columns accepted")
	}
}

// The search resumed from known effects (Options.Known, From; property
// test on seeded simulations with known truth): with the effects a full
// search found in the first part of a series given as known and the search
// limited to the rest, the effects of the whole series are found as the
// full search finds them (same kinds and indices, coefficients within
// 1e-6), in at least 90 % of 40 seeds; a known effect that is really
// there is kept; without Known and with From after it, it is not found.
func TestDetectResumesFromKnown(t *testing.T) {
	spec := arima.Spec{P: 1, D: 1, Q: 1}
	m := model(t, spec, []float64{0.5, -0.3})
	same, seeds := 0, 40
	for seed := uint64(1); seed <= uint64(seeds); seed++ {
		y := simulate(m, 300, seed)
		ao, ls := Column(AO, 80, 300, Delta), Column(LS, 260, 300, Delta)
		for i := range y {
			y[i] += 6*ao[i] + 5*ls[i]
		}
		full, err := Detect(y, nil, spec, &Options{MaxIter: 2})
		if err != nil {
			t.Fatal(err)
		}
		early, err := Detect(y[:240], nil, spec, &Options{MaxIter: 2})
		if err != nil {
			t.Fatal(err)
		}
		resumed, err := Detect(y, nil, spec, &Options{MaxIter: 2, Known: early.Outliers, From: 140})
		if err != nil {
			t.Fatal(err)
		}
		hasAO := false
		for _, o := range resumed.Outliers {
			hasAO = hasAO || (o.Kind == AO && o.Index == 80)
		}
		if !hasAO {
			t.Errorf("seed %d: the known AO at 80 was dropped (resumed %v)", seed, resumed.Outliers)
		}
		blind, err := Detect(y, nil, spec, &Options{MaxIter: 2, From: 140})
		if err != nil {
			t.Fatal(err)
		}
		for _, o := range blind.Outliers {
			if o.Index < 140 {
				t.Fatalf("seed %d: %v found before From", seed, o)
			}
		}
		if len(full.Outliers) != len(resumed.Outliers) {
			continue
		}
		ok := true
		for i, o := range full.Outliers {
			r := resumed.Outliers[i]
			ok = ok && o.Kind == r.Kind && o.Index == r.Index && math.Abs(o.Effect-r.Effect) < 1e-6
		}
		if ok {
			same++
		}
	}
	t.Logf("resumed search as the full one in %d/%d seeds", same, seeds)
	if same < seeds*9/10 {
		t.Errorf("the resumed search found the full search's effects in %d/%d seeds, want ≥ 90 %%", same, seeds)
	}
}

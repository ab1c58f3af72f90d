package main

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"testing"

	"forewarn/engine/arima"
	"gonum.org/v1/gonum/stat/distuv"
)

// floorDesign is one rolling-origin design of the coverage panel: per
// series the number of origins, the steps between them (the last at
// n − h) and the horizon.
type floorDesign struct {
	origins, every, horizon []int
}

// coverageFloor simulates, rep times, the per-series coverage that a
// perfectly calibrated forecaster would get on the design d, and returns
// the MACE (mean over series of |coverage − nominal|) of each replicate
// per level. The forecaster knows the true model, whose moving-average
// weights ψ (arima.PsiWeights, with the differencing) are psi[i]: its
// j-step error at origin T is Σ_{k<j} ψ_k ε_{T+j−k}, with standard
// deviation σ·√(Σ_{k<j} ψ_k²), and the innovations are Gaussian, so its
// bands hold their level exactly (Brockwell & Davis 1991, §5.3). What is
// left is the sampling noise of the design: consecutive origins share
// their realised future, so their coverage indicators are strongly
// correlated.
func coverageFloor(psi [][]float64, d floorDesign, nominal []float64, reps int, rng *rand.Rand) [][]float64 {
	zq := make([]float64, len(nominal))
	for l, p := range nominal {
		zq[l] = distuv.UnitNormal.Quantile(0.5 + p/2)
	}
	out := make([][]float64, len(nominal))
	for l := range out {
		out[l] = make([]float64, reps)
	}
	for r := 0; r < reps; r++ {
		for i, w := range psi {
			N, h := d.origins[i], d.horizon[i]
			sd := make([]float64, h)
			ss := 0.0
			for j := 0; j < h; j++ {
				ss += w[j] * w[j]
				sd[j] = math.Sqrt(ss)
			}
			// ε over the evaluated span: index u ↔ ε at time first+u.
			k := d.every[i]
			eps := make([]float64, (N-1)*k+h)
			for u := range eps {
				eps[u] = rng.NormFloat64()
			}
			hits := make([]int, len(nominal))
			for o := 0; o < N*k; o += k {
				for j := 1; j <= h; j++ {
					e := 0.0
					for k := 0; k < j; k++ {
						e += w[k] * eps[o+j-1-k]
					}
					z := math.Abs(e) / sd[j-1]
					for l := range zq {
						if z <= zq[l] {
							hits[l]++
						}
					}
				}
			}
			for l := range nominal {
				cov := float64(hits[l]) / float64(N*h)
				out[l][r] += math.Abs(cov-nominal[l]) / float64(len(psi))
			}
		}
	}
	return out
}

// panelPsi returns the ψ weights of the model forewarn chooses on each
// whole panel series (the "true" model of the floor simulation).
func panelPsi(t *testing.T, cases []panelCase) [][]float64 {
	t.Helper()
	psi := make([][]float64, len(cases))
	for i, c := range cases {
		_, y, err := readSeriesCSV(datasetPath(c.Name), "")
		if err != nil {
			t.Fatal(err)
		}
		cfg := panelConfig(t, c, false, 1, 1)
		ch, err := cfg.choose(y)
		if err != nil {
			t.Fatalf("%s: %v", c.Name, err)
		}
		psi[i] = arima.PsiWeights(ch.Result.Model, c.Horizon)
	}
	return psi
}

func quantiles(x []float64, p ...float64) []float64 {
	s := slices.Clone(x)
	slices.Sort(s)
	q := make([]float64, len(p))
	for i, v := range p {
		q[i] = s[int(math.Round(v*float64(len(s)-1)))]
	}
	return q
}

func mean(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

// TestCoveragePanelNoiseFloor measures what MACE a perfectly calibrated
// forecaster gets on the coverage panel's rolling-origin design (seeded
// simulations from each series' own chosen model, forecasting with the
// true model; property test): the design must be able to show the
// acceptance target of 0.06. The former design, 12 consecutive origins per
// series, could not: its floor is logged for the record and checked to be
// above the target at 80 %. Every origin over the second half of each
// series, and the reference's design (coverage_panel.json: every k-th of
// those origins, the last at n − h, panelOrigins) must put the mean floor
// below the target at both levels. The floor at 80 % stays near 0.05
// however many origins: the short seasonal series (72 months, h = 12) have
// only some thirty distinct future values in their second half.
func TestCoveragePanelNoiseFloor(t *testing.T) {
	cases := readPanel(t).Series
	psi := panelPsi(t, cases)
	nominal := []float64{0.80, 0.95}
	var old, all, cur floorDesign
	for _, c := range cases {
		_, y, err := readSeriesCSV(datasetPath(c.Name), "")
		if err != nil {
			t.Fatal(err)
		}
		old.origins = append(old.origins, 12)
		all.origins = append(all.origins, panelOrigins(len(y), c.Horizon, 1))
		cur.origins = append(cur.origins, panelOrigins(len(y), c.Horizon, c.every()))
		old.every = append(old.every, 1)
		all.every = append(all.every, 1)
		cur.every = append(cur.every, c.every())
		old.horizon = append(old.horizon, c.Horizon)
		all.horizon = append(all.horizon, c.Horizon)
		cur.horizon = append(cur.horizon, c.Horizon)
	}
	const reps = 2000
	for _, d := range []struct {
		name   string
		design floorDesign
		check  func(l int, mu, q95 float64)
	}{
		{"12 consecutive origins", old, func(l int, mu, q95 float64) {
			if l == 0 && mu <= 0.06 {
				t.Errorf("12 origins, 80 %%: mean floor %.4f; expected above the 0.06 target (the reason for the design)", mu)
			}
		}},
		{"every origin over the second half", all, func(l int, mu, q95 float64) {
			if mu > 0.06 {
				t.Errorf("every origin, %v: mean floor %.4f above the 0.06 target: the design cannot show it", nominal[l], mu)
			}
		}},
		{fmt.Sprintf("the reference's design, every %v-th origin", cur.every), cur, func(l int, mu, q95 float64) {
			if mu > 0.06 {
				t.Errorf("reference design (every %v), %v: mean floor %.4f above the 0.06 target: the design cannot show it", cur.every, nominal[l], mu)
			}
		}},
	} {
		m := coverageFloor(psi, d.design, nominal, reps, rand.New(rand.NewPCG(13, 2024)))
		for l := range nominal {
			q := quantiles(m[l], 0.05, 0.95)
			mu := mean(m[l])
			t.Logf("%s, %s %%: floor MACE mean %.4f, 90 %% range [%.4f, %.4f]", d.name,
				strconv.FormatFloat(100*nominal[l], 'f', -1, 64), mu, q[0], q[1])
			d.check(l, mu, q[1])
		}
	}
}

// panelCase is one series of the coverage panel (coverage_panel.json).
type panelCase struct {
	Name     string
	Period   int
	Horizon  int
	Every    int
	Origins  int
	Coverage map[string]float64
}

// every is the stride of the series' origins in the reference (1 when
// the file predates the field).
func (c panelCase) every() int { return max(c.Every, 1) }

type panelRef struct {
	Source string
	Design string
	Series []panelCase
	MACE   map[string]float64 `json:"mace"`
}

func readPanel(t *testing.T) panelRef {
	t.Helper()
	raw, err := os.ReadFile(filepath.Join("..", "..", "testdata", "backtest", "coverage_panel.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref panelRef
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	return ref
}

// panelOrigins is the number of origins of the coverage panel's design:
// training lengths T = n − h, n − h − every, … down to ⌈n/2⌉
// (coverage_panel.R uses the same).
func panelOrigins(n, h, every int) int { return (n-h-(n+1)/2)/every + 1 }

// panelConfig is the backtest configuration of one panel series: the
// automatic model and transform, levels 80 and 95, the series' horizon,
// origins every apart.
func panelConfig(t *testing.T, c panelCase, calibrate bool, origins, every int) *btConfig {
	t.Helper()
	seasons := ""
	if c.Period > 1 {
		seasons = strconv.Itoa(c.Period)
	}
	f := backtestFlags{modelFlags: modelFlags{model: "auto", seasons: seasons, constant: "auto", transform: "auto",
		levels: "80,95", horizon: c.Horizon}, origins: origins, every: every, format: "table", calibrate: calibrate}
	req, err := f.request()
	if err != nil {
		t.Fatal(err)
	}
	_, y, err := readSeriesCSV(datasetPath(c.Name), "")
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := req.config(nil, c.Name, len(y))
	if err != nil {
		t.Fatal(err)
	}
	return cfg
}

package alert

import (
	"encoding/csv"
	"math"
	"os"
	"strconv"
	"testing"

	"forewarn/engine/arima"
)

// arimaCase is one row of testdata/crossing_arima.csv, written by
// testdata/crossing.R part 2 (R 4.2.2 stats::arima/predict with fixed
// coefficients, ARMAtoMA; mvtnorm 1.1-3 pmvnorm, Genz-Bretz).
type arimaCase struct {
	name, direction string
	spec            arima.Spec
	params          []float64
	sigma2, thr     float64
	k, mState       int
	pGenz, genzErr  float64
	y               []float64 // history
	rMean, rSE      []float64 // R's forecasts from the history
}

func readCSV(t testing.TB, path string) (rows [][]string, col map[string]int) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err = csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col = map[string]int{}
	for i, n := range rows[0] {
		col[n] = i
	}
	return rows[1:], col
}

func loadArimaCases(t testing.TB) []arimaCase {
	t.Helper()
	num := func(r []string, col map[string]int, name string) float64 {
		v, err := strconv.ParseFloat(r[col[name]], 64)
		if err != nil {
			t.Fatalf("column %s: %v", name, err)
		}
		return v
	}
	rows, col := readCSV(t, "testdata/crossing_arima.csv")
	var out []arimaCase
	idx := map[string]int{}
	for _, r := range rows {
		n := func(s string) float64 { return num(r, col, s) }
		sp := arima.Spec{P: int(n("p")), D: int(n("d")), Q: int(n("q")), SP: int(n("P")), SD: int(n("D")),
			SQ: int(n("Q")), Period: int(n("s")), Mean: n("mean") != 0, Drift: n("drift") != 0}
		var params []float64
		params = append(params, []float64{n("ar1"), n("ar2")}[:sp.P]...)
		params = append(params, []float64{n("ma1"), n("ma2")}[:sp.Q]...)
		params = append(params, []float64{n("sar1")}[:sp.SP]...)
		params = append(params, []float64{n("sma1")}[:sp.SQ]...)
		if sp.Mean {
			params = append(params, n("mean"))
		}
		if sp.Drift {
			params = append(params, n("drift"))
		}
		idx[r[col["name"]]] = len(out)
		out = append(out, arimaCase{name: r[col["name"]], direction: r[col["direction"]], spec: sp, params: params,
			sigma2: n("sigma2"), thr: n("threshold"), k: int(n("k")), mState: int(n("m_state")),
			pGenz: n("p_genz"), genzErr: n("genz_err")})
	}
	rows, col = readCSV(t, "testdata/crossing_arima_series.csv")
	for _, r := range rows {
		c := &out[idx[r[col["name"]]]]
		c.y = append(c.y, num(r, col, "y"))
	}
	rows, col = readCSV(t, "testdata/crossing_arima_forecast.csv")
	for _, r := range rows {
		c := &out[idx[r[col["name"]]]]
		c.rMean = append(c.rMean, num(r, col, "mean"))
		c.rSE = append(c.rSE, num(r, col, "se"))
	}
	if len(out) == 0 {
		t.Fatal("crossing_arima.csv has no cases")
	}
	return out
}

// setup filters the history with the case's model and returns the query
// (forecast means and variances from Filter.Forecast) and the state space
// (Filter.PathSystem).
func (c arimaCase) setup(t testing.TB) (*Query, *StateSpace, *arima.Filter) {
	t.Helper()
	m, err := arima.NewModel(c.spec, c.params, c.sigma2)
	if err != nil {
		t.Fatal(err)
	}
	f, err := arima.NewFilter(m, c.k)
	if err != nil {
		t.Fatal(err)
	}
	f.Steps(c.y)
	mean := make([]float64, c.k)
	variance := make([]float64, c.k)
	f.Forecast(mean, variance)
	var ps arima.PathSystem
	if err := f.PathSystem(&ps); err != nil {
		t.Fatal(err)
	}
	ss := StateSpace(ps)
	d := Above
	if c.direction == "below" {
		d = Below
	}
	return &Query{Mean: mean, Variance: variance, Threshold: c.thr, Direction: d, Window: c.k}, &ss, f
}

// Seasonal ARIMA cases at k = 120 and 360 with state dimension up to 27:
// the crossing probability from the state-space paths (all paths drawn)
// agrees with R mvtnorm 1.1-3 pmvnorm (Genz-Bretz, on the covariance R
// builds from the ψ-weights of the model) within 4·sqrt(SE² + err²). The
// filter's forecasts are checked against R 4.2.2 predict() on the same
// history first (means to 1e-6 of a standard error, standard errors to
// 1e-6 relative), so the query is R's too.
func TestDecideArimaAgainstGenz(t *testing.T) {
	e := newEval(t, 360, 0)
	checked := 0
	for _, c := range loadArimaCases(t) {
		q, ss, f := c.setup(t)
		if f.StateDim() != c.mState {
			t.Errorf("%s: state dimension %d, R script says %d", c.name, f.StateDim(), c.mState)
		}
		for j := range q.Mean {
			se := math.Sqrt(q.Variance[j])
			if math.Abs(q.Mean[j]-c.rMean[j]) > 1e-6*c.rSE[j] || math.Abs(se-c.rSE[j]) > 1e-6*c.rSE[j] {
				t.Fatalf("%s step %d: forecast %.10g ± %.10g, R predict %.10g ± %.10g", c.name, j+1, q.Mean[j], se, c.rMean[j], c.rSE[j])
			}
		}
		est, err := e.Decide(q, ss, Rule{})
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if est.Method != MethodSimulation {
			t.Errorf("%s: method %v, want simulation", c.name, est.Method)
		}
		comb := math.Hypot(est.StdErr, c.genzErr)
		if math.Abs(est.P-c.pGenz) > 4*comb {
			t.Errorf("%s: p = %.5f ± %.5f, pmvnorm %.5f ± %.5f", c.name, est.P, est.StdErr, c.pGenz, c.genzErr)
		}
		checked++
		t.Logf("%s (k %d, m %d): p = %.5f (SE %.5f, %d paths), pmvnorm %.5f ± %.1e, |diff|/comb SE %.2f",
			c.name, c.k, c.mState, est.P, est.StdErr, est.Paths, c.pGenz, c.genzErr, ratio(est.P-c.pGenz, comb))
	}
	if checked < 6 {
		t.Errorf("checked %d cases, crossing_arima.csv has 6", checked)
	}
}

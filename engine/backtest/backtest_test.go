package backtest

import (
	"errors"
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"

	"forewarn/engine/internal/refdata"
)

// The series are those of R 4.2.2 `datasets` in testdata/datasets/NAME.csv
// (header time,value; NA = missing), read with refdata.Dataset.

// meanForecaster is the forecaster of testdata/backtest/backtest_refs.R: the
// training mean, with the normal-sample prediction interval
// mean ± t_{T−1}·sd·sqrt(1 + 1/T).
func meanForecaster(train []float64, h int, levels []float64) (Forecast, error) {
	mu, sd := stat.MeanStdDev(train, nil)
	T := float64(len(train))
	fc := Forecast{Mean: make([]float64, h)}
	for j := range fc.Mean {
		fc.Mean[j] = mu
	}
	for _, l := range levels {
		q := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: T - 1}.Quantile((1 + l/100) / 2)
		half := q * sd * math.Sqrt(1+1/T)
		lo, hi := make([]float64, h), make([]float64, h)
		for j := range lo {
			lo[j], hi[j] = mu-half, mu+half
		}
		fc.Lower = append(fc.Lower, lo)
		fc.Upper = append(fc.Upper, hi)
	}
	return fc, nil
}

// naiveForecaster is the seasonal-naive method with unbounded intervals.
func naiveForecaster(m int) Forecaster {
	return func(train []float64, h int, levels []float64) (Forecast, error) {
		fc := Forecast{Mean: make([]float64, h)}
		SeasonalNaive(fc.Mean, train, m)
		for range levels {
			lo, hi := make([]float64, h), make([]float64, h)
			for j := range lo {
				lo[j], hi[j] = math.Inf(-1), math.Inf(1)
			}
			fc.Lower = append(fc.Lower, lo)
			fc.Upper = append(fc.Upper, hi)
		}
		return fc, nil
	}
}

// TestRunAgainstR checks every score against an independent implementation
// in R 4.2.2 (testdata/backtest/backtest_refs.R → backtest_refs.json).
func TestRunAgainstR(t *testing.T) {
	var refs struct {
		Cases []struct {
			Name                     string
			Period, Horizon, Origins int
			MASE, SMAPE              float64
			Coverage                 []float64
			BaselineMASE             float64 `json:"baseline_mase"`
			BaselineSMAPE            float64 `json:"baseline_smape"`
		}
	}
	refdata.JSON(t, "backtest/backtest_refs.json", &refs)
	const tol = 1e-12 // relative; same arithmetic, different summation order
	for _, c := range refs.Cases {
		y := refdata.Dataset(t, c.Name)
		r, err := Run(y, Options{Horizon: c.Horizon, Origins: c.Origins, Period: c.Period}, meanForecaster, nil)
		if err != nil {
			t.Fatalf("%s: %v", c.Name, err)
		}
		check := func(what string, got, want float64) {
			if math.Abs(got-want) > tol*math.Abs(want) {
				t.Errorf("%s %s = %.15g, R 4.2.2 gives %.15g", c.Name, what, got, want)
			}
		}
		check("MASE", r.Model.MASE, c.MASE)
		check("sMAPE", r.Model.SMAPE, c.SMAPE)
		check("coverage 80", r.Coverage[0], c.Coverage[0])
		check("coverage 95", r.Coverage[1], c.Coverage[1])
		check("seasonal-naive MASE", r.Baseline.MASE, c.BaselineMASE)
		check("seasonal-naive sMAPE", r.Baseline.SMAPE, c.BaselineSMAPE)
		if r.Errors != c.Horizon*c.Origins || r.Failed != 0 {
			t.Errorf("%s: %d errors scored, %d failed; want %d, 0", c.Name, r.Errors, r.Failed, c.Horizon*c.Origins)
		}
	}
}

// TestSeasonalNaiveEqualsBaseline: a forecaster that is the seasonal-naive
// method must score exactly as the baseline (a property of the definitions).
func TestSeasonalNaiveEqualsBaseline(t *testing.T) {
	y := refdata.Dataset(t, "ldeaths_na") // R `ldeaths` with NA holes (testdata/r/arima_refs.R)
	r, err := Run(y, Options{Horizon: 12, Origins: 12, Period: 12}, naiveForecaster(12), nil)
	if err != nil {
		t.Fatal(err)
	}
	if r.Model != r.Baseline {
		t.Errorf("model %+v, baseline %+v: want equal", r.Model, r.Baseline)
	}
	if math.IsNaN(r.Model.MASE) || r.Model.MASE <= 0 {
		t.Errorf("MASE %v", r.Model.MASE)
	}
}

// TestSeasonalNaive checks the method on a hand-worked case with a hole:
// period 3, train 1..7 with y[5] missing.
func TestSeasonalNaive(t *testing.T) {
	nan := math.NaN()
	train := []float64{1, 2, 3, 4, 5, nan, 7}
	got := make([]float64, 5)
	SeasonalNaive(got, train, 3)
	// ŷ_8 = y_5 = 5; ŷ_9 = y_6 missing → y_3 = 3; ŷ_10 = y_7 = 7; ŷ_11 = y_5 = 5; ŷ_12 → 3.
	want := []float64{5, 3, 7, 5, 3}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("step %d: %v, want %v", i+1, got[i], want[i])
		}
	}
	SeasonalNaive(got[:2], train, 1) // naive: last observed value
	if got[0] != 7 || got[1] != 7 {
		t.Errorf("naive %v, want 7 7", got[:2])
	}
}

func TestRunErrors(t *testing.T) {
	y := refdata.Dataset(t, "Nile")
	cases := []struct {
		o    Options
		want error
	}{
		{Options{Horizon: 0}, ErrBadOptions},
		{Options{Horizon: 5, Origins: -1}, ErrBadOptions},
		{Options{Horizon: 5, Period: -2}, ErrBadOptions},
		{Options{Horizon: 5, Levels: []float64{100}}, ErrBadOptions},
		{Options{Horizon: 50, Origins: 50}, ErrTooShort},
	}
	for _, c := range cases {
		if _, err := Run(y, c.o, meanForecaster, nil); !errors.Is(err, c.want) {
			t.Errorf("%+v: %v, want %v", c.o, err, c.want)
		}
	}
	bad := func([]float64, int, []float64) (Forecast, error) { return Forecast{Mean: []float64{1}}, nil }
	if _, err := Run(y, Options{Horizon: 3}, bad, nil); !errors.Is(err, ErrAllFailed) {
		t.Errorf("wrong shape at every origin: %v, want ErrAllFailed", err)
	}
	calls := 0
	flaky := func(train []float64, h int, levels []float64) (Forecast, error) {
		calls++
		if calls%2 == 0 {
			return Forecast{}, errors.New("no fit")
		}
		return meanForecaster(train, h, levels)
	}
	var done []int
	r, err := Run(y, Options{Horizon: 3, Origins: 6}, flaky, func(d, n int) { done = append(done, d) })
	if err != nil {
		t.Fatal(err)
	}
	if r.Failed != 3 || r.Errors != 9 || len(done) != 6 || done[5] != 6 {
		t.Errorf("failed %d errors %d progress %v; want 3, 9, 1..6", r.Failed, r.Errors, done)
	}
}

func ExampleRun() {
	// Nile (R `datasets`), the naive forecaster scored against itself.
	y := []float64{1120, 1160, 963, 1210, 1160, 1160, 813, 1230, 1370, 1140}
	r, _ := Run(y, Options{Horizon: 1, Origins: 3}, naiveForecaster(1), nil)
	fmt.Printf("MASE %.3f (baseline %.3f), sMAPE %.2f%%\n", r.Model.MASE, r.Baseline.MASE, r.Model.SMAPE)
	// Worked by hand: errors 417, 140, 230 over in-sample naive MAEs
	// 881/6, 1298/7, 1438/8 give MASE 1.625; sMAPE (40.82+10.77+18.33)/3.
	// Output:
	// MASE 1.625 (baseline 1.625), sMAPE 23.31%
}

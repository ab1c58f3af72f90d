package auto

import (
	"math"
	"strconv"
	"testing"

	"forewarn/engine/internal/refdata"
)

// TestTaylorAgainstR: rolling origins one day apart on taylor (R forecast
// 8.20's half-hourly demand, cycles 48 and 336), horizon 48, MASE scaled by
// the in-sample lag-336 naive error (Hyndman & Koehler 2006), side by side
// with R forecast 8.20's dynamic harmonic regression (auto.arima with
// fourier(K = c(10, 10))), stlm(method = "arima") and weekly seasonal
// naive, all measured by testdata/r/taylor_accuracy.R in one run. Select
// chooses between its Fourier and profile routes by its holdout rule
// (package doc, "Choosing the route"); the target is asserted: at
// most 5 % above the better of R's two MASEs, and below weekly seasonal
// naive.
func TestTaylorAgainstR(t *testing.T) {
	if testing.Short() {
		t.Skip("five automatic fits on 3 800 points")
	}
	var ref struct {
		Horizon int
		Origins []int
		Scale   []float64
		Actual  map[string][]float64
		Mase    struct{ DHR, Stlm, Snaive float64 }
	}
	refdata.JSON(t, "r/taylor_accuracy.json", &ref)
	x := refdata.Dataset(t, "taylor")
	h := ref.Horizon
	sum := 0.0
	for i, o := range ref.Origins {
		c, err := Select(x[:o], Options{Seasons: []float64{48, 336}, Start: 1})
		if err != nil {
			t.Fatal(err)
		}
		w := make([]float64, o)
		if err := c.Transform.ForwardSlice(w, x[:o]); err != nil {
			t.Fatal(err)
		}
		f, err := c.Filter(h)
		if err != nil {
			t.Fatal(err)
		}
		f.Steps(w)
		mean, v := make([]float64, h), make([]float64, h)
		f.Forecast(mean, v)
		act := ref.Actual[strconv.Itoa(o)]
		mae := 0.0
		for k := 0; k < h; k++ {
			// the median on the raw scale: the inverse of the transform
			yk, ok := c.Transform.Inverse(mean[k])
			if !ok {
				t.Fatalf("origin %d: forecast %d outside the inverse's domain", o, k+1)
			}
			mae += math.Abs(yk - act[k])
		}
		m := mae / float64(h) / ref.Scale[i]
		sum += m
		t.Logf("origin %d: route %s (holdout MAE %+v), %s, seasons %+v, MASE %.3f", o, c.Route, c.Score, c.Spec.Label(), c.Seasons, m)
	}
	ours := sum / float64(len(ref.Origins))
	best := math.Min(ref.Mase.DHR, ref.Mase.Stlm)
	t.Logf("MASE: ours %.3f; R dynamic harmonic regression %.3f, stlm %.3f, weekly seasonal naive %.3f; ours/best-of-R %.3f (target ≤ 1.05)",
		ours, ref.Mase.DHR, ref.Mase.Stlm, ref.Mase.Snaive, ours/best)
	if ours > 1.05*best {
		t.Errorf("MASE %.3f is more than 5 %% above the better of R's, %.3f", ours, best)
	}
	if ours >= ref.Mase.Snaive {
		t.Errorf("MASE %.3f does not beat weekly seasonal naive, %.3f", ours, ref.Mase.Snaive)
	}
}

// TestTaylorMSTLAgainstR is TestTaylorAgainstR for the decomposition-plus-
// ARIMA route (SelectMSTL: MSTL, the automatic non-seasonal choice on the
// seasonally adjusted series, seasonal components carried forward), the
// route of R forecast 8.20's stlm(method = "arima") in the same JSON. The
// issue's target: at most 5 % above the better of R's two MASEs, and below
// weekly seasonal naive.
func TestTaylorMSTLAgainstR(t *testing.T) {
	if testing.Short() {
		t.Skip("five automatic fits on 3 800 points")
	}
	var ref struct {
		Horizon int
		Origins []int
		Scale   []float64
		Actual  map[string][]float64
		Mase    struct{ DHR, Stlm, Snaive float64 }
	}
	refdata.JSON(t, "r/taylor_accuracy.json", &ref)
	x := refdata.Dataset(t, "taylor")
	h := ref.Horizon
	sum := 0.0
	for i, o := range ref.Origins {
		c, err := SelectMSTL(x[:o], []int{48, 336}, Options{})
		if err != nil {
			t.Fatal(err)
		}
		mean, err := c.Forecast(h)
		if err != nil {
			t.Fatal(err)
		}
		act := ref.Actual[strconv.Itoa(o)]
		mae := 0.0
		for k := 0; k < h; k++ {
			mae += math.Abs(mean[k] - act[k])
		}
		m := mae / float64(h) / ref.Scale[i]
		sum += m
		t.Logf("origin %d: %s on the adjusted series (%s), MASE %.3f", o, c.Adjusted.Spec.Label(), c.Adjusted.Transform, m)
	}
	ours := sum / float64(len(ref.Origins))
	best := math.Min(ref.Mase.DHR, ref.Mase.Stlm)
	t.Logf("MASE: ours %.3f; R dynamic harmonic regression %.3f, stlm %.3f, weekly seasonal naive %.3f; ours/best-of-R %.3f",
		ours, ref.Mase.DHR, ref.Mase.Stlm, ref.Mase.Snaive, ours/best)
	if ours > 1.05*best {
		t.Errorf("MASE %.3f is more than 5 %% above the better of R's, %.3f", ours, best)
	}
	if ours >= ref.Mase.Snaive {
		t.Errorf("MASE %.3f does not beat weekly seasonal naive, %.3f", ours, ref.Mase.Snaive)
	}
}

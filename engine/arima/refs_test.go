package arima

import (
	"math"
	"testing"

	"forewarn/engine/internal/refdata"
)

// rCase is one reference fit from testdata/r/arima_refs.json, written by
// testdata/r/arima_refs.R with R 4.2.2 stats::arima(method = "ML") and
// predict.Arima on series of R's datasets package.
type rCase struct {
	ID         string    `json:"id"`
	Data       string    `json:"data"`
	Transform  string    `json:"transform"`
	Holes      []int     `json:"holes"`
	Order      []int     `json:"order"`
	Seasonal   []int     `json:"seasonal"`
	Period     int       `json:"period"`
	Mean       bool      `json:"mean"`
	Drift      bool      `json:"drift"`
	CoefNames  []string  `json:"coef_names"`
	Coef       []float64 `json:"coef"`
	CoefSE     []float64 `json:"coef_se"`
	Sigma2     float64   `json:"sigma2"`
	LogLik     float64   `json:"loglik"`
	AIC        float64   `json:"aic"`
	NObs       int       `json:"nobs"`
	Forecast   []float64 `json:"forecast"`
	ForecastSE []float64 `json:"forecast_se"`
}

func (c rCase) spec() Spec {
	s := Spec{P: c.Order[0], D: c.Order[1], Q: c.Order[2], SP: c.Seasonal[0], SD: c.Seasonal[1], SQ: c.Seasonal[2],
		Mean: c.Mean, Drift: c.Drift}
	if c.Seasonal[0]+c.Seasonal[1]+c.Seasonal[2] > 0 {
		s.Period = c.Period
	}
	return s
}

// series loads the case's data from testdata/datasets (exported by the same
// R script), applies its holes and transform.
func (c rCase) series(t testing.TB) []float64 {
	y := refdata.Dataset(t, c.Data)
	for _, h := range c.Holes {
		y[h-1] = math.NaN()
	}
	for i, v := range y {
		switch c.Transform {
		case "log":
			y[i] = math.Log(v)
		case "log10":
			y[i] = math.Log10(v)
		}
	}
	return y
}

func loadRefs(t testing.TB) []rCase {
	t.Helper()
	var doc struct {
		Cases []rCase `json:"cases"`
	}
	refdata.JSON(t, "r/arima_refs.json", &doc)
	return doc.Cases
}

// modelFromR builds the model with R's coefficients (R calls the mean
// "intercept" and the drift regressor "xreg").
func modelFromR(t testing.TB, c rCase) *Model {
	t.Helper()
	m, err := NewModel(c.spec(), c.Coef, c.Sigma2)
	if err != nil {
		t.Fatalf("%s: %v", c.ID, err)
	}
	return m
}

package arima

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"
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
	y := loadDataset(t, c.Data)
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
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "r", "arima_refs.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Cases []rCase `json:"cases"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	return doc.Cases
}

func loadDataset(t testing.TB, name string) []float64 {
	t.Helper()
	return loadCSV(t, filepath.Join("..", "..", "testdata", "datasets", name+".csv"))
}

func loadCSV(t testing.TB, path string) []float64 {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, 0, len(rows)-1)
	for _, r := range rows[1:] {
		v := r[len(r)-1]
		if v == "NA" {
			y = append(y, math.NaN())
			continue
		}
		x, err := strconv.ParseFloat(v, 64)
		if err != nil {
			t.Fatal(err)
		}
		y = append(y, x)
	}
	return y
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

package main

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func runFitCmd(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var out, errb bytes.Buffer
	code = dispatch(append([]string{"fit"}, args...), &out, &errb)
	return code, out.String(), errb.String()
}

func dataset(name string) string {
	return filepath.Join("..", "..", "testdata", "datasets", name+".csv")
}

// The JSON of CONTRACT.md §3 for USAccDeaths, (0,1,1)(0,1,1)[12]. Source:
// R 4.2.2 ?arima example / Brockwell & Davis (1991), as listed in
// ../shared/REFERENCES.md: ma1 −0.4303, sma1 −0.5528, σ² 99347, loglik
// −425.44, forecasts 8336.1 7531.8 …, se 315.45 363.01 …. Tolerances: 0.01
// on coefficients, 0.01 on the log-likelihood (forewarn's exact likelihood
// differs from R's κ-prior value by 0.0011 here), 0.2 % on σ², 2 % of a se
// on means, 1 % on se.
func TestFitJSONUSAccDeaths(t *testing.T) {
	code, out, errs := runFitCmd(t, "--order", "0,1,1", "--seasonal", "0,1,1", "--period", "12",
		"--horizon", "6", "--format", "json", dataset("USAccDeaths"))
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var doc struct {
		Model struct {
			Spec      string `json:"spec"`
			Order     []int  `json:"order"`
			Seasonal  []int  `json:"seasonal"`
			Period    int    `json:"period"`
			Mean      bool   `json:"mean"`
			Transform string `json:"transform"`
		} `json:"model"`
		Coef struct {
			AR, MA, SAR, SMA []float64
			Mean, Drift      *float64
		} `json:"coef"`
		Sigma2, LogLik, AIC, AICc, BIC float64
		NObs                           int `json:"nobs"`
		Forecast                       []struct {
			H            int
			Mean, SE     float64
			Lower, Upper map[string]float64
		} `json:"forecast"`
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	raw := map[string]any{}
	json.Unmarshal([]byte(out), &raw)
	for _, k := range []string{"model", "coef", "sigma2", "loglik", "aic", "aicc", "bic", "nobs", "forecast"} {
		if _, ok := raw[k]; !ok {
			t.Errorf("JSON lacks %q", k)
		}
	}
	if doc.Model.Spec != "ARIMA(0,1,1)(0,1,1)[12]" || doc.Model.Period != 12 || doc.Model.Mean || doc.Model.Transform != "none" {
		t.Errorf("model %+v", doc.Model)
	}
	if len(doc.Coef.AR) != 0 || doc.Coef.Mean != nil || doc.Coef.Drift != nil ||
		math.Abs(doc.Coef.MA[0]+0.4303) > 0.01 || math.Abs(doc.Coef.SMA[0]+0.5528) > 0.01 {
		t.Errorf("coef %+v", doc.Coef)
	}
	if math.Abs(doc.LogLik+425.44) > 0.01 || math.Abs(doc.Sigma2/99347-1) > 0.002 || doc.NObs != 59 {
		t.Errorf("loglik %v sigma2 %v nobs %d", doc.LogLik, doc.Sigma2, doc.NObs)
	}
	if math.Abs(doc.AIC-(-2*doc.LogLik+6)) > 1e-9 {
		t.Errorf("aic %v", doc.AIC)
	}
	wantMean := []float64{8336.1, 7531.8, 8314.6, 8616.9, 9488.9, 9859.8}
	wantSE := []float64{315.45, 363.01, 405.02, 443.06, 478.09, 510.72}
	for i, fc := range doc.Forecast {
		if math.Abs(fc.Mean-wantMean[i]) > 0.02*wantSE[i] || math.Abs(fc.SE/wantSE[i]-1) > 0.01 {
			t.Errorf("h=%d mean %v se %v, R %v %v", fc.H, fc.Mean, fc.SE, wantMean[i], wantSE[i])
		}
		// normal bands: mean ± 1.2816 se and ± 1.96 se (common practice)
		if math.Abs(fc.Lower["80"]-(fc.Mean-1.2815516*fc.SE)) > 1e-3 || math.Abs(fc.Upper["95"]-(fc.Mean+1.959964*fc.SE)) > 1e-3 {
			t.Errorf("h=%d bands %v %v", fc.H, fc.Lower, fc.Upper)
		}
	}
}

// log transform: the fit is on the log scale (R 4.2.2 arima(log(AirPassengers),
// (0,1,1)(0,1,1)[12]): loglik 244.70, ma1 −0.4018, sma1 −0.5569), se is on the
// model scale, mean/lower/upper are raw units: bands are exp of the log-scale
// bands and the mean is exp(w)(1 + se²/2) (NUMERICS-NOTES).
func TestFitLogTransform(t *testing.T) {
	code, out, errs := runFitCmd(t, "--order", "0,1,1", "--seasonal", "0,1,1", "--period", "12",
		"--transform", "log", "--format", "json", "--horizon", "3", dataset("AirPassengers"))
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var doc struct {
		Model    struct{ Transform string }
		Coef     struct{ MA, SMA []float64 }
		LogLik   float64
		Forecast []struct {
			Mean, SE     float64
			Lower, Upper map[string]float64
		}
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Model.Transform != "log" || math.Abs(doc.LogLik-244.70) > 0.01 ||
		math.Abs(doc.Coef.MA[0]+0.4018) > 0.01 || math.Abs(doc.Coef.SMA[0]+0.5569) > 0.01 {
		t.Errorf("log fit: %+v", doc)
	}
	for _, fc := range doc.Forecast {
		med := math.Sqrt(fc.Lower["95"] * fc.Upper["95"]) // exp of the band centre
		if math.Abs(fc.Mean/(med*(1+fc.SE*fc.SE/2))-1) > 1e-9 || !(fc.Lower["80"] > fc.Lower["95"]) {
			t.Errorf("back-transform: %+v", fc)
		}
	}
}

func writeTemp(t *testing.T, name, body string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// Bad input: exit code 2 and a message naming the problem, the file and
// the line (CONTRACT.md §1).
func TestFitErrors(t *testing.T) {
	badLine := writeTemp(t, "bad.csv", "time,value\n1,10\n2,11\n3,twelve\n4,13\n")
	short := writeTemp(t, "short.csv", "time,value\n1,10\n2,11\n3,9\n")
	ragged := writeTemp(t, "ragged.csv", "time,value\n1,10\n2\n")
	constant := writeTemp(t, "const.csv", "value\n5\n5\n5\n5\n5\n5\n5\n5\n5\n5\n")
	for _, c := range []struct {
		name  string
		args  []string
		code  int
		wants []string
	}{
		{"bad number", []string{"--order", "1,0,0", badLine}, exitUsage, []string{badLine + ":4", "twelve"}},
		{"ragged", []string{"--order", "1,0,0", ragged}, exitUsage, []string{ragged + ":3"}},
		{"too short", []string{"--order", "2,0,1", short}, exitUsage, []string{"too short"}},
		{"constant", []string{"--order", "1,0,0", constant}, exitUsage, []string{"constant"}},
		{"impossible order", []string{"--order", "1,5,0", dataset("lh")}, exitUsage, []string{"d = 5"}},
		{"seasonal without period", []string{"--order", "0,1,1", "--seasonal", "0,1,1", dataset("lh")}, exitUsage, []string{"--period"}},
		{"mean with d=2", []string{"--order", "0,2,1", "--mean", "yes", dataset("lh")}, exitUsage, []string{"d+D = 2"}},
		{"missing file", []string{"--order", "1,0,0", "nope.csv"}, exitUsage, []string{"nope.csv"}},
		{"no column", []string{"--order", "1,0,0", "--column", "x", dataset("lh")}, exitUsage, []string{`no column named "x"`}},
		{"bad flag", []string{"--order", "1,0", dataset("lh")}, exitUsage, []string{"--order"}},
		{"log of negative", []string{"--order", "1,0,0", "--transform", "log", writeTemp(t, "neg.csv", "v\n1\n-2\n3\n")}, exitUsage, []string{"observation 2"}},
	} {
		code, _, errs := runFitCmd(t, c.args...)
		if code != c.code {
			t.Errorf("%s: exit %d, want %d (%s)", c.name, code, c.code, errs)
		}
		for _, w := range c.wants {
			if !strings.Contains(errs, w) {
				t.Errorf("%s: message %q lacks %q", c.name, errs, w)
			}
		}
	}
}

// Table output, flags after the file, missing values and a drift.
func TestFitTableAndDrift(t *testing.T) {
	code, out, errs := runFitCmd(t, dataset("austres"), "--order", "1,1,0", "--mean", "yes", "--horizon", "4")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	// R 4.2.2 arima(austres, c(1,1,0), xreg = 1:n): testdata/r/arima_refs.json, case austres_110_drift.
	for _, w := range []string{"ARIMA(1,1,0) with drift", "drift", "lower 80", "upper 95", "nobs 88"} {
		if !strings.Contains(out, w) {
			t.Errorf("table lacks %q:\n%s", w, out)
		}
	}
	code, out, errs = runFitCmd(t, "--order", "1,0,0", dataset("presidents"))
	if code != exitOK || !strings.Contains(out, "nobs 114") {
		t.Errorf("presidents (6 missing, R nobs 114): exit %d %s %s", code, out, errs)
	}
}

func TestReadSeriesCSV(t *testing.T) {
	p := writeTemp(t, "s.csv", "\ufefftime,a,b\n2024-01,1,x\n2024-02,,y\n2024-03,NA,z\n2024-04,4.5,w\n")
	times, v, err := readSeriesCSV(p, "a")
	if err != nil {
		t.Fatal(err)
	}
	if len(v) != 4 || v[0] != 1 || !math.IsNaN(v[1]) || !math.IsNaN(v[2]) || v[3] != 4.5 || times[3] != "2024-04" {
		t.Errorf("times %v values %v", times, v)
	}
	if _, _, err := readSeriesCSV(p, ""); err == nil || !strings.Contains(err.Error(), p+":2") {
		t.Errorf("last column is text: %v", err)
	}
	one := writeTemp(t, "one.csv", "value\n3\nNaN\n")
	times, v, err = readSeriesCSV(one, "")
	if err != nil || times != nil || !math.IsNaN(v[1]) {
		t.Errorf("single column: %v %v %v", times, v, err)
	}
	if _, _, err := readSeriesCSV(writeTemp(t, "e.csv", ""), ""); err == nil {
		t.Error("empty file accepted")
	}
}

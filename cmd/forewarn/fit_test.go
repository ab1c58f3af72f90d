package main

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"forewarn/engine/transform"
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

// rRef is one reference fit written by an R script next to its values
// (testdata/r/arima_refs.R, cmd/forewarn/testdata/fit_refs.R): R 4.2.2
// stats::arima(method = "ML") and predict.Arima on the transformed series.
type rRef struct {
	ID         string    `json:"id"`
	Data       string    `json:"data"`
	Transform  string    `json:"transform"`
	Lambda     float64   `json:"lambda"`
	Order      []int     `json:"order"`
	Seasonal   []int     `json:"seasonal"`
	Period     int       `json:"period"`
	Coef       []float64 `json:"coef"`
	Sigma2     float64   `json:"sigma2"`
	LogLik     float64   `json:"loglik"`
	NObs       int       `json:"nobs"`
	Forecast   []float64 `json:"forecast"`
	ForecastSE []float64 `json:"forecast_se"`
}

func loadRRefs(t *testing.T, path string) map[string]rRef {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct{ Cases []rRef }
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	m := map[string]rRef{}
	for _, c := range doc.Cases {
		m[c.ID] = c
	}
	return m
}

// fitDoc is the part of the fit JSON the transform tests read; bounds are
// pointers because an unbounded one is null.
type fitDoc struct {
	Model struct {
		Spec      string
		Transform string
		Order     []int
		Seasonal  []int
		Mean      bool
	}
	Coef      struct{ MA, SMA []float64 }
	Sigma2    float64
	LogLik    float64
	AIC, AICc float64
	NObs      int
	Forecast  []struct {
		H            int
		Mean, Median *float64
		SE           float64
		Lower, Upper map[string]*float64
	}
	Candidates []struct {
		Spec, Transform string
		AICc            *float64
		Rejected        string
	}
}

func fitJSON(t *testing.T, args ...string) fitDoc {
	t.Helper()
	code, out, errs := runFitCmd(t, append([]string{"--format", "json"}, args...)...)
	if code != exitOK {
		t.Fatalf("fit %v: exit %d: %s", args, code, errs)
	}
	var doc fitDoc
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	return doc
}

func airlineArgs(r rRef, transform string) []string {
	return []string{"--order", "0,1,1", "--seasonal", "0,1,1", "--period", strconv.Itoa(r.Period),
		"--transform", transform, "--horizon", strconv.Itoa(len(r.Forecast)), dataset(r.Data)}
}

// Normal quantiles for the 80 % and 95 % central intervals (common practice).
var zOf = map[string]float64{"80": 1.2815515655446004, "95": 1.959963984540054}

// --transform log, the airline model of log AirPassengers. Source: R 4.2.2
// arima(log(AirPassengers), c(0,1,1), seasonal = c(0,1,1), method = "ML") and
// predict (testdata/r/arima_refs.json, case AirPassengers_log_airline; the
// same values are in ../shared/REFERENCES.md: loglik 244.70, ma1 −0.4018,
// sma1 −0.5569). The JSON loglik is the model-scale one (CONTRACT.md §3), R's
// value, not the raw-scale loglik − Σ log y_t. In raw units the mean is
// exp(w)(1 + σ²_h/2), σ²_h = se², the median exp(w), the bounds exp(w ± z·se)
// (NUMERICS-NOTES, bias-adjusted back-transform), w and se being R's
// log-scale forecast and standard error.
//
// Tolerances: 0.01 on coefficients and the log-likelihood (forewarn's exact
// diffuse likelihood differs from R's κ-prior value by 0.003 here), 1 % on
// σ² and se, 2 % of a se on w (as for USAccDeaths above); the raw-unit
// numbers are compared on the log scale with those tolerances.
func TestFitLogTransformR(t *testing.T) {
	r := loadRRefs(t, filepath.Join("..", "..", "testdata", "r", "arima_refs.json"))["AirPassengers_log_airline"]
	doc := fitJSON(t, airlineArgs(r, "log")...)
	if doc.Model.Transform != "log" || doc.NObs != r.NObs {
		t.Errorf("model %+v nobs %d, want transform log, nobs %d", doc.Model, doc.NObs, r.NObs)
	}
	if math.Abs(doc.Coef.MA[0]-r.Coef[0]) > 0.01 || math.Abs(doc.Coef.SMA[0]-r.Coef[1]) > 0.01 {
		t.Errorf("coef ma %v sma %v, R %v", doc.Coef.MA, doc.Coef.SMA, r.Coef)
	}
	if math.Abs(doc.Sigma2/r.Sigma2-1) > 0.01 {
		t.Errorf("sigma2 %v, R %v", doc.Sigma2, r.Sigma2)
	}
	_, raw, err := readSeriesCSV(dataset(r.Data), "")
	if err != nil {
		t.Fatal(err)
	}
	jac := 0.0 // Σ log y_t over the observations in the likelihood (after d + sD = 13)
	for _, y := range raw[13:] {
		jac += math.Log(y)
	}
	if math.Abs(doc.LogLik-r.LogLik) > 0.01 || math.Abs(doc.LogLik-(r.LogLik-jac)) < 100 {
		t.Errorf("loglik %v, want R's model-scale %v (raw-scale would be %v)", doc.LogLik, r.LogLik, r.LogLik-jac)
	}
	if math.Abs(doc.AIC-(-2*doc.LogLik+2*3)) > 1e-9 {
		t.Errorf("aic %v, want −2·loglik + 2(k+1), k = 2", doc.AIC)
	}
	if len(doc.Forecast) != len(r.Forecast) {
		t.Fatalf("%d forecast points, want %d", len(doc.Forecast), len(r.Forecast))
	}
	for i, fc := range doc.Forecast {
		w, se := r.Forecast[i], r.ForecastSE[i]
		tolW := 0.02 * se
		if math.Abs(fc.SE/se-1) > 0.01 {
			t.Errorf("h=%d se %v, R %v", fc.H, fc.SE, se)
		}
		if math.Abs(math.Log(*fc.Median)-w) > tolW {
			t.Errorf("h=%d median %v, R exp(w) = %v", fc.H, *fc.Median, math.Exp(w))
		}
		if math.Abs(math.Log(*fc.Mean)-math.Log(math.Exp(w)*(1+se*se/2))) > tolW+0.02*se*se {
			t.Errorf("h=%d mean %v, R exp(w)(1+se²/2) = %v", fc.H, *fc.Mean, math.Exp(w)*(1+se*se/2))
		}
		// The same identity on forewarn's own w and se, to rounding.
		if math.Abs(*fc.Mean/(*fc.Median*(1+fc.SE*fc.SE/2))-1) > 1e-12 {
			t.Errorf("h=%d mean %v ≠ median·(1 + se²/2) = %v", fc.H, *fc.Mean, *fc.Median*(1+fc.SE*fc.SE/2))
		}
		for l, z := range zOf {
			lo, hi := math.Log(*fc.Lower[l]), math.Log(*fc.Upper[l])
			if math.Abs(lo-(w-z*se)) > tolW+z*0.01*se || math.Abs(hi-(w+z*se)) > tolW+z*0.01*se {
				t.Errorf("h=%d %s%% band [%v, %v], R exp(w ∓ z·se) = [%v, %v]", fc.H, l,
					*fc.Lower[l], *fc.Upper[l], math.Exp(w-z*se), math.Exp(w+z*se))
			}
		}
	}
}

// --transform boxcox(λ) with a fixed λ. Source: R 4.2.2 stats::arima on
// w = (x^λ − 1)/λ (cmd/forewarn/testdata/fit_refs.json, written by
// fit_refs.R there): coefficients, loglik on the model scale, and the
// model-scale forecasts w and se. Properties checked in raw units (round
// trips through the Box-Cox transform, computed here from its formula):
// g(median) = w; g(lower), g(upper) = w ∓ z·se; the bias-adjusted mean
// (λw+1)^{1/λ}·[1 + se²(1−λ)/(2(λw+1)²)] (NUMERICS-NOTES). Tolerances as in
// TestFitLogTransformR; the round trips on forewarn's own numbers to 1e-9
// relative.
func TestFitBoxCoxR(t *testing.T) {
	refs := loadRRefs(t, filepath.Join("testdata", "fit_refs.json"))
	for _, id := range []string{"AirPassengers_boxcox0.3_airline", "UKgas_boxcox-0.2_airline", "USAccDeaths_boxcox-0.5_airline"} {
		r, ok := refs[id]
		if !ok {
			t.Fatalf("no case %s", id)
		}
		lam := r.Lambda
		name := "boxcox(" + strconv.FormatFloat(lam, 'g', -1, 64) + ")"
		doc := fitJSON(t, airlineArgs(r, name)...)
		if doc.Model.Transform != name || doc.NObs != r.NObs {
			t.Errorf("%s: transform %q nobs %d, want %q %d", id, doc.Model.Transform, doc.NObs, name, r.NObs)
		}
		if math.Abs(doc.Coef.MA[0]-r.Coef[0]) > 0.01 || math.Abs(doc.Coef.SMA[0]-r.Coef[1]) > 0.01 ||
			math.Abs(doc.LogLik-r.LogLik) > 0.01 || math.Abs(doc.Sigma2/r.Sigma2-1) > 0.01 {
			t.Errorf("%s: ma %v sma %v loglik %v sigma2 %v; R %v %v %v", id, doc.Coef.MA, doc.Coef.SMA,
				doc.LogLik, doc.Sigma2, r.Coef, r.LogLik, r.Sigma2)
		}
		g := func(x float64) float64 { return (math.Pow(x, lam) - 1) / lam }
		for i, fc := range doc.Forecast {
			w, se := r.Forecast[i], r.ForecastSE[i]
			if math.Abs(fc.SE/se-1) > 0.01 || math.Abs(g(*fc.Median)-w) > 0.02*se {
				t.Errorf("%s h=%d: se %v g(median) %v; R se %v w %v", id, fc.H, fc.SE, g(*fc.Median), se, w)
			}
			wf := g(*fc.Median) // forewarn's w
			u := lam*wf + 1
			wantMean := math.Pow(u, 1/lam) * (1 + fc.SE*fc.SE*(1-lam)/(2*u*u))
			if math.Abs(*fc.Mean/wantMean-1) > 1e-9 {
				t.Errorf("%s h=%d: mean %v, bias-adjusted back-transform %v", id, fc.H, *fc.Mean, wantMean)
			}
			for l, z := range zOf {
				if fc.Lower[l] == nil || fc.Upper[l] == nil {
					t.Errorf("%s h=%d: %s%% bound null, but λ(w ± z·se)+1 > 0 here", id, fc.H, l)
					continue
				}
				lo, hi := g(*fc.Lower[l]), g(*fc.Upper[l])
				if math.Abs((lo+hi)/2-wf) > 1e-9*math.Abs(wf) || math.Abs((hi-lo)/2/(z*fc.SE)-1) > 1e-6 {
					t.Errorf("%s h=%d: g(bounds) %v %v, want %v ∓ %v", id, fc.H, lo, hi, wf, z*fc.SE)
				}
			}
		}
	}
}

// A value whose model-scale image lies outside the inverse's domain is null
// (CONTRACT.md §3): boxcox(λ) with λ < 0 inverts only where λw + 1 > 0. A
// long horizon on the UKgas model of TestFitBoxCoxR with λ = −1 (w < 1)
// reaches past that edge. The inverse is increasing, so the lower bound
// w − z·se stays finite longest; w is recovered from it with the formula
// g(x) = 1 − 1/x, and the median (and mean) must be null exactly when
// λw + 1 ≤ 0, the upper bound exactly when λ(w + z·se) + 1 ≤ 0.
func TestFitBoxCoxUnboundedIsNull(t *testing.T) {
	doc := fitJSON(t, "--order", "0,1,1", "--seasonal", "0,1,1", "--period", "4", "--transform", "boxcox(-1)",
		"--horizon", "200", "--levels", "95", dataset("UKgas"))
	z := zOf["95"]
	checked, nullUpper, nullMedian := 0, 0, 0
	for _, fc := range doc.Forecast {
		if fc.Lower["95"] == nil {
			break
		}
		w := 1 - 1 / *fc.Lower["95"] + z*fc.SE
		if out := -w+1 <= 0; out != (fc.Median == nil) || out != (fc.Mean == nil) {
			t.Errorf("h=%d: λw+1 = %v, median %v mean %v", fc.H, -w+1, fc.Median, fc.Mean)
		} else if out {
			nullMedian++
		}
		if out := -(w+z*fc.SE)+1 <= 0; out != (fc.Upper["95"] == nil) {
			t.Errorf("h=%d: λ(w+z·se)+1 = %v, upper %v", fc.H, -(w+z*fc.SE)+1, fc.Upper["95"])
		} else if out {
			nullUpper++
		}
		checked++
	}
	if nullUpper == 0 || nullMedian == 0 || checked-nullUpper == 0 {
		t.Errorf("%d steps checked, %d null upper bounds, %d null medians: the case does not cross the edge",
			checked, nullUpper, nullMedian)
	}
}

// --transform auto with --order: only the transform is chosen, every
// candidate has the given spec, and the chosen one has the lowest raw-scale
// AICc. The printed transform spec reads back (transform.Transform.String
// writes the shortest λ that parses to the same float64), so fitting it as
// a fixed transform gives the same fit to rounding. Without --order the
// printed fit is the automatic choice's own: refitting its spec and
// transform explicitly gives the same log-likelihood (tolerance 1e-3: the
// search warm-starts from a neighbour, the explicit fit from CSS).
func TestFitTransformAuto(t *testing.T) {
	args := []string{"--order", "0,1,1", "--seasonal", "0,1,1", "--period", "12", "--horizon", "3", dataset("AirPassengers")}
	doc := fitJSON(t, append([]string{"--transform", "auto"}, args...)...)
	best, bestT := math.Inf(1), ""
	for _, c := range doc.Candidates {
		if c.Spec != "ARIMA(0,1,1)(0,1,1)[12]" {
			t.Errorf("candidate %+v: the spec was fixed", c)
		}
		if c.AICc != nil && *c.AICc < best {
			best, bestT = *c.AICc, c.Transform
		}
	}
	if len(doc.Candidates) < 3 || doc.Model.Transform != bestT {
		t.Errorf("transform %q, candidates %+v", doc.Model.Transform, doc.Candidates)
	}
	fixed := fitJSON(t, append([]string{"--transform", doc.Model.Transform}, args...)...)
	if math.Abs(fixed.LogLik-doc.LogLik) > 1e-6 || *fixed.Forecast[0].Mean != *doc.Forecast[0].Mean {
		t.Errorf("auto %v %v, fixed %q %v %v", doc.LogLik, *doc.Forecast[0].Mean, doc.Model.Transform,
			fixed.LogLik, *fixed.Forecast[0].Mean)
	}

	// boxcox without λ: Guerrero's λ on [−1, 2], subseries of one period.
	_, raw, _ := readSeriesCSV(dataset("AirPassengers"), "")
	lam, err := transform.Guerrero(raw, 12, -1, 2)
	if err != nil {
		t.Fatal(err)
	}
	bc := fitJSON(t, append([]string{"--transform", "boxcox"}, args...)...)
	if tr, err := transform.Parse(bc.Model.Transform); err != nil || tr.Lambda != lam {
		t.Errorf("boxcox: transform %q (%v), want λ %v", bc.Model.Transform, err, lam)
	}

	chosen := fitJSON(t, "--transform", "auto", "--period", "12", "--horizon", "3", dataset("AirPassengers"))
	m := chosen.Model
	mean := "no"
	if m.Mean {
		mean = "yes"
	}
	triple := func(v []int) string { return fmt.Sprintf("%d,%d,%d", v[0], v[1], v[2]) }
	again := fitJSON(t, "--order", triple(m.Order), "--seasonal", triple(m.Seasonal), "--period", "12",
		"--mean", mean, "--transform", m.Transform, "--horizon", "3", dataset("AirPassengers"))
	if again.Model.Spec != m.Spec || math.Abs(again.LogLik-chosen.LogLik) > 1e-3 {
		t.Errorf("automatic %s %q loglik %v; explicit refit %s loglik %v", m.Spec, m.Transform, chosen.LogLik,
			again.Model.Spec, again.LogLik)
	}
	if len(chosen.Candidates) == 0 {
		t.Error("no candidates listed for the automatic choice")
	}
}

// --plot writes the chart (stream/web/chart): an SVG document whose root
// element is <svg> (W3C SVG 1.1, §5.1), a PNG file that starts with the
// eight signature bytes 89 50 4E 47 0D 0A 1A 0A (PNG specification, ISO/IEC
// 15948, §5.2). A CSV without a time column draws against observation
// numbers. A path that cannot be written is a runtime failure (exit 1).
func TestFitPlot(t *testing.T) {
	dir := t.TempDir()
	svg, png := filepath.Join(dir, "ap.svg"), filepath.Join(dir, "ap.PNG")
	for _, p := range []string{svg, png} {
		code, _, errs := runFitCmd(t, "--order", "0,1,1", "--seasonal", "0,1,1", "--period", "12",
			"--transform", "log", "--horizon", "24", "--plot", p, dataset("AirPassengers"))
		if code != exitOK {
			t.Fatalf("--plot %s: exit %d: %s", p, code, errs)
		}
	}
	f, err := os.Open(svg)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	root := ""
	dec := xml.NewDecoder(f)
	for root == "" {
		tok, err := dec.Token()
		if err != nil {
			t.Fatalf("%s: %v", svg, err)
		}
		if se, ok := tok.(xml.StartElement); ok {
			root = se.Name.Local
		}
	}
	if root != "svg" {
		t.Errorf("%s: root element <%s>, want <svg>", svg, root)
	}
	b, err := os.ReadFile(png)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(b, []byte("\x89PNG\r\n\x1a\n")) {
		t.Errorf("%s: starts with % x, want the PNG signature", png, b[:min(8, len(b))])
	}

	noTime := writeTemp(t, "v.csv", "value\n"+strings.Repeat("3\n5\n4\n6\n", 10))
	if code, _, errs := runFitCmd(t, "--order", "1,0,0", "--plot", filepath.Join(dir, "v.svg"), noTime); code != exitOK {
		t.Errorf("no time column: exit %d: %s", code, errs)
	}
	bad := filepath.Join(dir, "no-such-dir", "x.svg")
	if code, _, errs := runFitCmd(t, "--order", "1,0,0", "--plot", bad, dataset("lh")); code != exitFailure || !strings.Contains(errs, bad) {
		t.Errorf("unwritable plot: exit %d, want %d, message %q naming %s", code, exitFailure, errs, bad)
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
		{"boxcox of negative", []string{"--order", "1,0,0", "--transform", "boxcox", writeTemp(t, "neg2.csv", "v\n1\n-2\n3\n")}, exitUsage, []string{"neg2.csv", "observation 2"}},
		{"auto log of negative", []string{"--transform", "log", writeTemp(t, "neg3.csv", "v\n1\n-2\n3\n4\n5\n6\n7\n8\n9\n10\n")}, exitUsage, []string{"neg3.csv", "log of -2"}},
		{"bad transform", []string{"--order", "1,0,0", "--transform", "boxcox(x)", dataset("lh")}, exitUsage, []string{"--transform", "boxcox(x)"}},
		{"bad plot extension", []string{"--order", "1,0,0", "--plot", "out.gif", dataset("lh")}, exitUsage, []string{"--plot", "out.gif"}},
		{"seasonal without order", []string{"--seasonal", "0,1,1", "--period", "12", dataset("lh")}, exitUsage, []string{"--seasonal", "--order"}},
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

// Fit the first-order autoregression of R's lh series (R 4.2.2 ?arima
// example, ../shared/REFERENCES.md: ar1 0.5739, mean 2.4133, σ² 0.1975,
// loglik −29.38) and read the JSON; the first forecast's median equals its
// mean without a transform.
func Example_fit() {
	var out bytes.Buffer
	dispatch([]string{"fit", "--order", "1,0,0", "--horizon", "1", "--format", "json", dataset("lh")}, &out, os.Stderr)
	var doc fitDoc
	var coef struct {
		Coef struct {
			AR   []float64
			Mean float64
		}
	}
	json.Unmarshal(out.Bytes(), &doc)
	json.Unmarshal(out.Bytes(), &coef)
	fmt.Printf("%s %s ar1 %.4f mean %.4f sigma2 %.4f loglik %.2f\n", doc.Model.Spec, doc.Model.Transform,
		coef.Coef.AR[0], coef.Coef.Mean, doc.Sigma2, doc.LogLik)
	fmt.Printf("h=1 mean %.4f median %.4f\n", *doc.Forecast[0].Mean, *doc.Forecast[0].Median)
	// Output:
	// ARIMA(1,0,0) none ar1 0.5739 mean 2.4133 sigma2 0.1975 loglik -29.38
	// h=1 mean 2.6926 median 2.6926
}

// Whole `forewarn fit` runs (CSV read, fit, forecast, no printing) on
// AirPassengers: the log airline model with fixed orders, and the automatic
// choice of transform and orders.
func BenchmarkFit(b *testing.B) {
	for _, c := range []struct {
		name string
		args []string
	}{
		{"log-airline", []string{"--order", "0,1,1", "--seasonal", "0,1,1", "--period", "12", "--transform", "log"}},
		{"auto", []string{"--period", "12", "--transform", "auto"}},
	} {
		b.Run(c.name, func(b *testing.B) {
			req, _, err := parseFitArgs(append(c.args, "--horizon", "24", dataset("AirPassengers")))
			if err != nil {
				b.Fatal(err)
			}
			b.ReportAllocs()
			for b.Loop() {
				if _, err := fitFile(req); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"
	"text/tabwriter"

	"gonum.org/v1/gonum/stat/distuv"

	"forewarn/engine/arima"
	"forewarn/engine/auto"
)

func init() {
	register("fit", "fit one model to a CSV series and forecast", runFit)
}

const fitUsageText = `usage: forewarn fit [flags] FILE

Fits a seasonal ARIMA model to one series of a CSV file (header row; the
value column is --column NAME, else the last column; an empty cell, NA or NaN
is a missing value) by exact maximum likelihood and forecasts it.

flags (before or after FILE):
  --order p,d,q        non-seasonal orders (absent: chosen automatically)
  --seasonal P,D,Q     seasonal orders (default 0,0,0)
  --period s           seasonal period (required with --seasonal)
  --mean yes|no|auto   estimate a mean; auto: a mean when d+D = 0. With d+D = 1,
                       yes estimates the mean of the differenced series (a drift)
  --transform NAME     none | log (default none)
  --horizon h          forecast steps (default 10)
  --levels L1,L2       prediction interval levels in percent (default 80,95)
  --format table|json  output format (default table)
  --column NAME        value column
`

// fitRequest is what the user asked for.
type fitRequest struct {
	order, seasonal []int // nil when not given
	period          int
	mean            string
	transform       string
	horizon         int
	levels          []float64
	format          string
	column          string
	file            string
}

// usageError marks a problem with the command line or the input file
// (exit code 2).
type usageError struct{ err error }

func (e usageError) Error() string { return e.err.Error() }
func (e usageError) Unwrap() error { return e.err }

func badUsage(format string, a ...any) error { return usageError{fmt.Errorf(format, a...)} }

// runFit implements "forewarn fit".
func runFit(args []string, stdout, stderr io.Writer) int {
	req, help, err := parseFitArgs(args)
	if help {
		fmt.Fprint(stdout, fitUsageText)
		return exitOK
	}
	if err != nil {
		fmt.Fprintf(stderr, "forewarn fit: %v\n\n%s", err, fitUsageText)
		return exitUsage
	}
	out, err := fitFile(req)
	if err != nil {
		fmt.Fprintf(stderr, "forewarn fit: %v\n", err)
		var ue usageError
		if errors.As(err, &ue) {
			return exitUsage
		}
		return exitFailure
	}
	if req.format == "json" {
		enc := json.NewEncoder(stdout)
		if err := enc.Encode(out); err != nil {
			fmt.Fprintf(stderr, "forewarn fit: %v\n", err)
			return exitFailure
		}
		return exitOK
	}
	writeFitTable(stdout, out, req.levels)
	return exitOK
}

func parseFitArgs(args []string) (req fitRequest, help bool, err error) {
	fs := flag.NewFlagSet("fit", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	order := fs.String("order", "", "")
	seasonal := fs.String("seasonal", "", "")
	fs.IntVar(&req.period, "period", 0, "")
	fs.StringVar(&req.mean, "mean", "auto", "")
	fs.StringVar(&req.transform, "transform", "none", "")
	fs.IntVar(&req.horizon, "horizon", 10, "")
	levels := fs.String("levels", "80,95", "")
	fs.StringVar(&req.format, "format", "table", "")
	fs.StringVar(&req.column, "column", "", "")
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return req, true, nil
			}
			return req, false, err
		}
		args = fs.Args()
		if len(args) == 0 {
			break
		}
		if args[0] == "--" {
			pos = append(pos, args[1:]...)
			break
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
	if len(pos) != 1 {
		return req, false, fmt.Errorf("want exactly one FILE, got %d arguments", len(pos))
	}
	req.file = pos[0]
	if *order != "" {
		if req.order, err = parseTriple("--order", *order); err != nil {
			return req, false, err
		}
	}
	if *seasonal != "" {
		if req.seasonal, err = parseTriple("--seasonal", *seasonal); err != nil {
			return req, false, err
		}
	}
	switch req.mean {
	case "yes", "no", "auto":
	default:
		return req, false, fmt.Errorf("--mean %q: want yes, no or auto", req.mean)
	}
	if _, err := newLocalTransform(req.transform); err != nil {
		return req, false, err
	}
	if req.horizon < 1 || req.horizon > 100000 {
		return req, false, fmt.Errorf("--horizon %d: want a positive number of steps", req.horizon)
	}
	for _, s := range strings.Split(*levels, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
		if err != nil || !(v > 0 && v < 100) {
			return req, false, fmt.Errorf("--levels %q: want percentages between 0 and 100, e.g. 80,95", *levels)
		}
		req.levels = append(req.levels, v)
	}
	sort.Float64s(req.levels)
	switch req.format {
	case "table", "json":
	default:
		return req, false, fmt.Errorf("--format %q: want table or json", req.format)
	}
	return req, false, nil
}

func parseTriple(flagName, s string) ([]int, error) {
	parts := strings.Split(s, ",")
	if len(parts) != 3 {
		return nil, fmt.Errorf("%s %q: want three comma-separated orders, e.g. 1,1,1", flagName, s)
	}
	out := make([]int, 3)
	for i, p := range parts {
		v, err := strconv.Atoi(strings.TrimSpace(p))
		if err != nil || v < 0 {
			return nil, fmt.Errorf("%s %q: orders must be non-negative integers", flagName, s)
		}
		out[i] = v
	}
	return out, nil
}

// chooseSpec is the model-choice step: the explicit orders of the request,
// or, without --order, the automatic choice of engine/auto on the raw
// values (transform fixed by --transform), with the candidates it tried.
func chooseSpec(raw []float64, req fitRequest) (arima.Spec, []auto.Candidate, error) {
	if req.order == nil {
		c, err := auto.Select(raw, auto.Options{Period: req.period, Transform: req.transform, Mean: req.mean})
		if err != nil {
			return arima.Spec{}, nil, fmt.Errorf("%s: automatic model choice: %w", req.file, err)
		}
		return c.Spec, c.Tried, nil
	}
	s, err := explicitSpec(req)
	return s, nil, err
}

// explicitSpec turns the --order/--seasonal/--period/--mean flags into a
// validated specification.
func explicitSpec(req fitRequest) (arima.Spec, error) {
	s := arima.Spec{P: req.order[0], D: req.order[1], Q: req.order[2]}
	if req.seasonal != nil {
		s.SP, s.SD, s.SQ = req.seasonal[0], req.seasonal[1], req.seasonal[2]
		if req.period == 0 && s.SP+s.SD+s.SQ > 0 {
			return s, badUsage("--seasonal %d,%d,%d needs --period s", s.SP, s.SD, s.SQ)
		}
	}
	if req.period != 0 {
		s.Period = req.period
	}
	nd := s.D + s.SD
	switch req.mean {
	case "auto":
		s.Mean = nd == 0
	case "yes":
		switch nd {
		case 0:
			s.Mean = true
		case 1:
			s.Drift = true
		default:
			return s, badUsage("--mean yes with d+D = %d: a mean or drift needs d+D of 0 or 1", nd)
		}
	}
	if err := s.Validate(); err != nil {
		return s, usageError{err}
	}
	return s, nil
}

// localTransform is the small seam through which fit maps raw values onto
// the model's scale and forecasts back; engine/transform will replace the
// two implementations below.
type localTransform interface {
	Name() string
	Forward(x float64) (float64, error)
	// Inverse maps a quantile (median, band endpoint) back to raw units.
	Inverse(w float64) float64
	// Mean is the raw-unit mean of a normal forecast N(w, variance).
	Mean(w, variance float64) float64
}

func newLocalTransform(name string) (localTransform, error) {
	switch name {
	case "none":
		return identity{}, nil
	case "log":
		return logTransform{}, nil
	}
	return nil, fmt.Errorf("--transform %q: want none or log", name)
}

type identity struct{}

func (identity) Name() string                       { return "none" }
func (identity) Forward(x float64) (float64, error) { return x, nil }
func (identity) Inverse(w float64) float64          { return w }
func (identity) Mean(w, _ float64) float64          { return w }

type logTransform struct{}

func (logTransform) Name() string { return "log" }
func (logTransform) Forward(x float64) (float64, error) {
	if !(x > 0) {
		return 0, fmt.Errorf("value %v: log needs positive values", x)
	}
	return math.Log(x), nil
}
func (logTransform) Inverse(w float64) float64 { return math.Exp(w) }

// Mean is the second-order bias-adjusted back-transform exp(w)(1 + v/2)
// (NUMERICS-NOTES, Box-Cox with λ = 0).
func (logTransform) Mean(w, v float64) float64 { return math.Exp(w) * (1 + v/2) }

// fitOutput is the JSON document of CONTRACT.md §3 (plus converged/note).
type fitOutput struct {
	Model     fitModel      `json:"model"`
	Coef      fitCoef       `json:"coef"`
	Sigma2    float64       `json:"sigma2"`
	LogLik    float64       `json:"loglik"`
	AIC       float64       `json:"aic"`
	AICc      jsonFloat     `json:"aicc"`
	BIC       float64       `json:"bic"`
	NObs      int           `json:"nobs"`
	Converged bool          `json:"converged"`
	Note      string        `json:"note,omitempty"`
	Forecast  []fitForecast `json:"forecast"`
	// Candidates are the fits the automatic choice tried (without --order).
	Candidates []fitCandidate `json:"candidates,omitempty"`

	coefSE []float64
	spec   arima.Spec
}

type fitModel struct {
	Spec      string `json:"spec"`
	Order     [3]int `json:"order"`
	Seasonal  [3]int `json:"seasonal"`
	Period    int    `json:"period"`
	Mean      bool   `json:"mean"`
	Transform string `json:"transform"`
}

type fitCoef struct {
	AR    []float64  `json:"ar"`
	MA    []float64  `json:"ma"`
	SAR   []float64  `json:"sar"`
	SMA   []float64  `json:"sma"`
	Mean  *jsonFloat `json:"mean"`
	Drift *jsonFloat `json:"drift"`
}

type fitForecast struct {
	H     int                  `json:"h"`
	Mean  jsonFloat            `json:"mean"`
	SE    jsonFloat            `json:"se"`
	Lower map[string]jsonFloat `json:"lower"`
	Upper map[string]jsonFloat `json:"upper"`
}

// jsonFloat encodes NaN and ±Inf as null (JSON has neither).
type jsonFloat float64

func (f jsonFloat) MarshalJSON() ([]byte, error) {
	v := float64(f)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(v)
}

func levelKey(l float64) string { return strconv.FormatFloat(l, 'f', -1, 64) }

// fitFile reads, transforms, fits and forecasts.
func fitFile(req fitRequest) (*fitOutput, error) {
	_, raw, err := readSeriesCSV(req.file, req.column)
	if err != nil {
		return nil, usageError{err}
	}
	tr, _ := newLocalTransform(req.transform)
	w := make([]float64, len(raw))
	for i, x := range raw {
		if math.IsNaN(x) {
			w[i] = x
			continue
		}
		if w[i], err = tr.Forward(x); err != nil {
			return nil, badUsage("%s: observation %d: %v", req.file, i+1, err)
		}
	}
	spec, tried, err := chooseSpec(raw, req)
	if err != nil {
		return nil, err
	}
	res, err := arima.Fit(w, spec, nil)
	if err != nil {
		if errors.Is(err, arima.ErrTooShort) || errors.Is(err, arima.ErrConstant) ||
			errors.Is(err, arima.ErrData) || errors.Is(err, arima.ErrSpec) {
			return nil, usageError{fmt.Errorf("%s: %w", req.file, err)}
		}
		return nil, fmt.Errorf("%s: %w", req.file, err)
	}
	f, err := arima.NewFilter(res.Model, req.horizon)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", req.file, err)
	}
	f.Steps(w)
	mean := make([]float64, req.horizon)
	variance := make([]float64, req.horizon)
	f.Forecast(mean, variance)
	out := buildFitOutput(res, tr, mean, variance, req.levels)
	for _, c := range tried {
		out.Candidates = append(out.Candidates, fitCandidate{c.Spec, c.Transform, jsonFloat(c.AICc), c.Err})
	}
	return out, nil
}

// fitCandidate is one model the automatic choice tried (AICc on the raw
// scale; rejected ones carry the reason).
type fitCandidate struct {
	Spec      string    `json:"spec"`
	Transform string    `json:"transform"`
	AICc      jsonFloat `json:"aicc"`
	Rejected  string    `json:"rejected,omitempty"`
}

func buildFitOutput(res *arima.Result, tr localTransform, mean, variance, levels []float64) *fitOutput {
	m := res.Model
	s := m.Spec
	orNil := func(x []float64) []float64 {
		if x == nil {
			return []float64{}
		}
		return x
	}
	out := &fitOutput{
		Model: fitModel{Spec: s.String(), Order: [3]int{s.P, s.D, s.Q}, Seasonal: [3]int{s.SP, s.SD, s.SQ},
			Period: s.Period, Mean: s.Mean || s.Drift, Transform: tr.Name()},
		Coef:      fitCoef{AR: orNil(m.AR), MA: orNil(m.MA), SAR: orNil(m.SAR), SMA: orNil(m.SMA)},
		Sigma2:    m.Sigma2,
		LogLik:    res.LogLik,
		AIC:       res.AIC,
		AICc:      jsonFloat(res.AICc),
		BIC:       res.BIC,
		NObs:      res.NObs,
		Converged: res.Converged,
		Note:      res.Note,
		coefSE:    res.StdErr,
		spec:      s,
	}
	if s.Mean {
		v := jsonFloat(m.Mean)
		out.Coef.Mean = &v
	}
	if s.Drift {
		v := jsonFloat(m.Drift)
		out.Coef.Drift = &v
	}
	std := distuv.UnitNormal
	for h := range mean {
		se := math.Sqrt(variance[h])
		fc := fitForecast{H: h + 1, Mean: jsonFloat(tr.Mean(mean[h], variance[h])), SE: jsonFloat(se),
			Lower: map[string]jsonFloat{}, Upper: map[string]jsonFloat{}}
		for _, l := range levels {
			z := std.Quantile(0.5 + l/200)
			fc.Lower[levelKey(l)] = jsonFloat(tr.Inverse(mean[h] - z*se))
			fc.Upper[levelKey(l)] = jsonFloat(tr.Inverse(mean[h] + z*se))
		}
		out.Forecast = append(out.Forecast, fc)
	}
	return out
}

// writeFitTable prints the fit for a person.
func writeFitTable(w io.Writer, out *fitOutput, levels []float64) {
	fmt.Fprintf(w, "model      %s  (transform %s)\n", out.Model.Spec, out.Model.Transform)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "coefficient\testimate\tstd. error\t")
	names := coefNames(out.spec)
	vals := append(append(append(append([]float64{}, out.Coef.AR...), out.Coef.MA...), out.Coef.SAR...), out.Coef.SMA...)
	if out.Coef.Mean != nil {
		vals = append(vals, float64(*out.Coef.Mean))
	}
	if out.Coef.Drift != nil {
		vals = append(vals, float64(*out.Coef.Drift))
	}
	for i, n := range names {
		fmt.Fprintf(tw, "%s\t%.6g\t%.4g\t\n", n, vals[i], out.coefSE[i])
	}
	tw.Flush()
	fmt.Fprintf(w, "sigma2 %.6g   loglik %.4f   aic %.4f   aicc %.4f   bic %.4f   nobs %d\n",
		out.Sigma2, out.LogLik, out.AIC, float64(out.AICc), out.BIC, out.NObs)
	if !out.Converged {
		fmt.Fprintf(w, "warning: the optimiser did not converge: %s\n", out.Note)
	} else if out.Note != "" {
		fmt.Fprintf(w, "note: %s\n", out.Note)
	}
	if len(out.Candidates) > 0 {
		fmt.Fprintf(w, "\ncandidates tried (AICc on the raw scale):\n")
		tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		for _, c := range out.Candidates {
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\n", c.Spec, c.Transform, fmtNum(float64(c.AICc)), c.Rejected)
		}
		tw.Flush()
	}
	fmt.Fprintln(w)
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprint(tw, "h\tmean\tse\t")
	for _, l := range levels {
		fmt.Fprintf(tw, "lower %s\tupper %s\t", levelKey(l), levelKey(l))
	}
	fmt.Fprintln(tw)
	for _, fc := range out.Forecast {
		fmt.Fprintf(tw, "%d\t%s\t%s\t", fc.H, fmtNum(float64(fc.Mean)), fmtNum(float64(fc.SE)))
		for _, l := range levels {
			fmt.Fprintf(tw, "%s\t%s\t", fmtNum(float64(fc.Lower[levelKey(l)])), fmtNum(float64(fc.Upper[levelKey(l)])))
		}
		fmt.Fprintln(tw)
	}
	tw.Flush()
}

func coefNames(s arima.Spec) []string {
	var n []string
	add := func(prefix string, k int) {
		for i := 1; i <= k; i++ {
			n = append(n, prefix+strconv.Itoa(i))
		}
	}
	add("ar", s.P)
	add("ma", s.Q)
	add("sar", s.SP)
	add("sma", s.SQ)
	if s.Mean {
		n = append(n, "mean")
	}
	if s.Drift {
		n = append(n, "drift")
	}
	return n
}

func fmtNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "-"
	}
	return strconv.FormatFloat(v, 'g', 6, 64)
}

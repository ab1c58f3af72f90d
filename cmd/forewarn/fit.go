package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"text/tabwriter"

	"forewarn/engine/arima"
	"forewarn/engine/auto"
	"forewarn/engine/transform"
	"forewarn/stream/web/chart"
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
  --seasonal P,D,Q     seasonal orders, with --order (default 0,0,0)
  --period s           seasonal period (required with --seasonal)
  --mean yes|no|auto   estimate a mean; auto: a mean when d+D = 0. With d+D = 1,
                       yes estimates the mean of the differenced series (a drift)
  --transform NAME     none | log | boxcox | boxcox(λ) | scaled-exp | auto
                       (default none, so that the fit is that of the values as
                       they are). boxcox without λ takes Guerrero's λ; auto
                       chooses by the AICc on the raw scale. The fit, its
                       loglik, aic and se are on the transformed scale; mean,
                       median and the bands are in raw units (mean
                       bias-adjusted; a bound outside the inverse's domain is
                       null in JSON, - in the table)
  --horizon h          forecast steps (default 10)
  --levels L1,L2       prediction interval levels in percent (default 80,95)
  --format table|json  output format (default table)
  --column NAME        value column
  --plot FILE          also draw the history, median forecast and bands to
                       FILE.svg or FILE.png (the CSV's first column as times)
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
	plot            string // chart file, "" for none
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
	if err == nil && req.plot != "" {
		err = writePlot(req, out)
	}
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
	fs.StringVar(&req.plot, "plot", "", "")
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
		if req.order == nil {
			return req, false, fmt.Errorf("--seasonal %q needs --order (without --order the model is chosen automatically)", *seasonal)
		}
		if req.seasonal, err = parseTriple("--seasonal", *seasonal); err != nil {
			return req, false, err
		}
	}
	switch req.mean {
	case "yes", "no", "auto":
	default:
		return req, false, fmt.Errorf("--mean %q: want yes, no or auto", req.mean)
	}
	if req.transform != "auto" {
		if _, err := transform.Parse(req.transform); err != nil {
			return req, false, fmt.Errorf("--transform %q: want none, log, boxcox, boxcox(λ), scaled-exp or auto", req.transform)
		}
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
	if req.plot != "" {
		if _, err := chart.FormatOf(req.plot); err != nil {
			return req, false, fmt.Errorf("--plot %q: want a file name ending in .svg or .png", req.plot)
		}
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

// fitChoice is the model-choice step:
//   - without --order, engine/auto chooses the order (and the transform with
//     --transform auto) and its fit is kept as it is, so that the printed
//     log-likelihood and AICc are those of the chosen model;
//   - with --order and --transform auto, engine/auto chooses only the
//     transform, the spec fixed;
//   - with --order and a fixed transform, the spec is fitted directly
//     (no candidate is rejected: the user asked for this model).
func fitChoice(raw []float64, req fitRequest) (*auto.Choice, error) {
	if req.order == nil {
		return selectModel(raw, req, auto.Options{Period: req.period, Transform: req.transform, Mean: req.mean})
	}
	spec, err := explicitSpec(req)
	if err != nil {
		return nil, err
	}
	if req.transform == "auto" {
		// The spec string carries the constant (a mean, a drift or "with
		// zero mean"), so Mean "auto" keeps it as given.
		return selectModel(raw, req, auto.Options{Period: req.period, Transform: "auto", Model: spec.String(), Mean: "auto"})
	}
	tr, err := fixedTransform(raw, req)
	if err != nil {
		return nil, err
	}
	w, err := forwardSeries(tr, raw, req.file)
	if err != nil {
		return nil, err
	}
	res, err := arima.Fit(w, spec, nil)
	if err != nil {
		return nil, inputOrRuntime(req.file, err)
	}
	return &auto.Choice{Spec: spec, Transform: tr, Result: res, RawAICc: math.NaN()}, nil
}

func selectModel(raw []float64, req fitRequest, o auto.Options) (*auto.Choice, error) {
	c, err := auto.Select(raw, o)
	if err != nil {
		return nil, inputOrRuntime(req.file, fmt.Errorf("automatic choice: %w", err))
	}
	return c, nil
}

// inputOrRuntime prefixes err with the file name and marks the errors that
// come from the data or the request (exit code 2); the others (a failed
// optimisation, every candidate rejected) are runtime failures.
func inputOrRuntime(file string, err error) error {
	err = fmt.Errorf("%s: %w", file, err)
	for _, e := range []error{arima.ErrTooShort, arima.ErrConstant, arima.ErrData, arima.ErrSpec,
		auto.ErrBadOptions, auto.ErrTooShort, auto.ErrDomain, transform.ErrDomain} {
		if errors.Is(err, e) {
			return usageError{err}
		}
	}
	return err
}

// fixedTransform is the --transform of the request made ready for raw: a
// boxcox without λ gets Guerrero's λ on [−1, 2] (subseries of one period,
// at least 2, as engine/auto chooses it), a scaled-exp its frozen z-score.
func fixedTransform(raw []float64, req fitRequest) (transform.Transform, error) {
	tr, err := transform.Parse(req.transform)
	if err != nil {
		return tr, usageError{err}
	}
	if tr.Name == transform.BoxCox && math.IsNaN(tr.Lambda) {
		for i, x := range raw {
			if x <= 0 {
				return tr, badUsage("%s: observation %d: %v: boxcox needs values > 0", req.file, i+1, x)
			}
		}
		lam, err := transform.Guerrero(raw, max(req.period, 2), -1, 2)
		if err != nil {
			return tr, usageError{fmt.Errorf("%s: choosing the Box-Cox λ: %w", req.file, err)}
		}
		tr.Lambda = lam
	}
	return transform.Freeze(tr, raw), nil
}

// forwardSeries maps raw onto the model scale of tr; an error names the
// observation (counted from 1, missing values included).
func forwardSeries(tr transform.Transform, raw []float64, file string) ([]float64, error) {
	w := make([]float64, len(raw))
	for i, x := range raw {
		v, err := tr.Forward(x)
		if err != nil {
			return nil, usageError{fmt.Errorf("%s: observation %d: %w", file, i+1, err)}
		}
		w[i] = v
	}
	return w, nil
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
	times  []string  // CSV time column, nil without one
	values []float64 // raw series
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
	H      int                  `json:"h"`
	Mean   jsonFloat            `json:"mean"`
	Median jsonFloat            `json:"median"`
	SE     jsonFloat            `json:"se"`
	Lower  map[string]jsonFloat `json:"lower"`
	Upper  map[string]jsonFloat `json:"upper"`
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

// fitFile reads, chooses and fits, and forecasts in raw units.
func fitFile(req fitRequest) (*fitOutput, error) {
	times, raw, err := readSeriesCSV(req.file, req.column)
	if err != nil {
		return nil, usageError{err}
	}
	ch, err := fitChoice(raw, req)
	if err != nil {
		return nil, err
	}
	w, err := forwardSeries(ch.Transform, raw, req.file)
	if err != nil {
		return nil, err
	}
	f, err := arima.NewFilter(ch.Result.Model, req.horizon)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", req.file, err)
	}
	f.Steps(w)
	mean := make([]float64, req.horizon)
	variance := make([]float64, req.horizon)
	f.Forecast(mean, variance)
	out := buildFitOutput(ch.Result, ch.Transform, mean, variance, req.levels)
	for _, c := range ch.Tried {
		out.Candidates = append(out.Candidates, fitCandidate{c.Spec, c.Transform, jsonFloat(c.AICc), c.Err})
	}
	out.times, out.values = times, raw
	return out, nil
}

// writePlot draws the history, the median forecast and one band per level
// (stream/web/chart) to req.plot, in the format its extension names. Times
// that go backwards are the input file's fault (exit 2); any other failure,
// such as an unwritable path, is a runtime failure.
func writePlot(req fitRequest, out *fitOutput) error {
	o := chart.Offline{
		Title:  fmt.Sprintf("%s: %s, transform %s", filepath.Base(req.file), out.Model.Spec, out.Model.Transform),
		Times:  out.times,
		Values: out.values,
		Levels: req.levels,
	}
	for _, fc := range out.Forecast {
		lo, hi := make([]float64, len(req.levels)), make([]float64, len(req.levels))
		for i, l := range req.levels {
			lo[i], hi[i] = float64(fc.Lower[levelKey(l)]), float64(fc.Upper[levelKey(l)])
		}
		o.Median = append(o.Median, float64(fc.Median))
		o.Lower = append(o.Lower, lo)
		o.Upper = append(o.Upper, hi)
	}
	d, err := o.Data()
	if err == nil {
		err = chart.WriteFile(req.plot, d, chart.Options{})
	}
	switch {
	case errors.Is(err, chart.ErrOrder):
		return badUsage("%s: --plot: the time column goes backwards: %v", req.file, err)
	case err != nil:
		return fmt.Errorf("--plot %s: %w", req.plot, err)
	}
	return nil
}

// fitCandidate is one model the automatic choice tried (AICc on the raw
// scale; rejected ones carry the reason).
type fitCandidate struct {
	Spec      string    `json:"spec"`
	Transform string    `json:"transform"`
	AICc      jsonFloat `json:"aicc"`
	Rejected  string    `json:"rejected,omitempty"`
}

// buildFitOutput assembles the JSON document from the fit and the
// model-scale forecast N(mean[h], variance[h]) (CONTRACT.md §3): se stays
// on the model scale; mean, median and bands are in raw units (toRawUnits),
// a value outside the inverse's domain printed as null.
func buildFitOutput(res *arima.Result, tr transform.Transform, mean, variance, levels []float64) *fitOutput {
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
			Period: s.Period, Mean: s.Mean || s.Drift, Transform: tr.String()},
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
	raw := toRawUnits(tr, mean, variance, levels)
	for h := range mean {
		fc := fitForecast{H: h + 1,
			Mean:   jsonFloat(raw.Mean[h]),
			Median: jsonFloat(raw.Median[h]),
			SE:     jsonFloat(math.Sqrt(variance[h])),
			Lower:  map[string]jsonFloat{}, Upper: map[string]jsonFloat{}}
		for i, l := range levels {
			fc.Lower[levelKey(l)], fc.Upper[levelKey(l)] = jsonFloat(raw.Lower[i][h]), jsonFloat(raw.Upper[i][h])
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
	fmt.Fprint(tw, "h\tmean\tmedian\tse\t")
	for _, l := range levels {
		fmt.Fprintf(tw, "lower %s\tupper %s\t", levelKey(l), levelKey(l))
	}
	fmt.Fprintln(tw)
	for _, fc := range out.Forecast {
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t", fc.H, fmtNum(float64(fc.Mean)), fmtNum(float64(fc.Median)), fmtNum(float64(fc.SE)))
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

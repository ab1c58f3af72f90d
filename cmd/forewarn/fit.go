package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"path/filepath"
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
value column is --column NAME, else the last column; the first column of a
file with more than one holds the times, RFC 3339 or Unix seconds; an empty
cell, NA or NaN is a missing value) by exact maximum likelihood and
forecasts it.

flags (before or after FILE):
  --model M            auto (the default: orders chosen by a stepwise AICc
                       search), "p,d,q" or "p,d,q x P,D,Q" (fixed orders)
  --seasons LIST       seasonal cycles: durations such as 1d,7d (which need a
                       time column or --step; they need not be whole numbers
                       of steps) or whole numbers of steps such as 12. With
                       --model auto a single short whole cycle gets seasonal
                       ARIMA terms, otherwise each cycle gets K sin/cos pairs
                       (K chosen by AICc, up to 10) or none. When a cycle
                       would take sin/cos pairs and the series is complete
                       and longer than three of its longest cycles, auto
                       also fits a seasonal profile (each cycle's last
                       decomposed shape as one term, with non-seasonal
                       ARIMA errors) and keeps whichever forecasts the last
                       longest cycle better; such cycles show terms
                       "profile". A fixed seasonal model uses one whole
                       cycle
  --step DURATION      the spacing of the rows (instead of the time column)
  --constant C         auto (a mean when d+D = 0, else none; the search tries
                       both), none, mean (needs d+D = 0) or drift (d+D = 1)
  --transform NAME     none | log | boxcox | boxcox(λ) | scaled-exp | auto
                       (default none, so that the fit is that of the values as
                       they are). boxcox without λ takes Guerrero's λ; auto
                       chooses by the AICc on the raw scale. The fit and sd
                       are on the transformed scale; mean, median and the
                       bands are in raw units (mean bias-adjusted; a bound
                       outside the inverse's domain is null in JSON, "open"
                       in the table)
  --horizon h          forecast steps (default 24)
  --levels L1,L2       prediction interval levels in percent (default 50,90)
  --format table|json  output format (default table)
  --column NAME        value column
  --plot FILE          also draw the history, median forecast and bands to
                       FILE.svg or FILE.png (the CSV's first column as times)
`

// fitRequest is what the user asked for.
type fitRequest struct {
	modelRequest
	format string
	column string
	plot   string // chart file, "" for none
	file   string
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
	writeFitTable(stdout, out, filepath.Base(req.file))
	return exitOK
}

func parseFitArgs(args []string) (req fitRequest, help bool, err error) {
	if err := checkRetired(args); err != nil {
		return req, false, err
	}
	fs := flag.NewFlagSet("fit", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	var mf modelFlags
	mf.register(fs, "none")
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
	mr, probs := mf.check()
	if len(pos) != 1 {
		probs = append(probs, fmt.Sprintf("want exactly one FILE, got %d arguments", len(pos)))
	} else {
		req.file = pos[0]
	}
	switch req.format {
	case "table", "json":
	default:
		probs = append(probs, fmt.Sprintf("--format %q: want table or json", req.format))
	}
	if req.plot != "" {
		if _, err := chart.FormatOf(req.plot); err != nil {
			probs = append(probs, fmt.Sprintf("--plot %q: want a file name ending in .svg or .png", req.plot))
		}
	}
	req.modelRequest = *mr
	if len(probs) > 0 {
		return req, false, errors.New(strings.Join(probs, "; "))
	}
	return req, false, nil
}

// fitChoice is the model-choice step:
//   - with --model auto, engine/auto chooses the orders (and the transform
//     with --transform auto) and its fit is kept as it is, so that the
//     printed log-likelihood and AICc are those of the chosen model;
//   - with fixed orders and --transform auto, engine/auto chooses only the
//     transform;
//   - with fixed orders and a fixed transform, the model is fitted directly
//     (no candidate is rejected: the user asked for this model).
func fitChoice(raw []float64, period int, req fitRequest) (*auto.Choice, error) {
	if !req.fixed() || req.transform == "auto" {
		return selectModel(raw, req, auto.Options{Period: period, Transform: req.transform, Model: req.model, Constant: req.constant})
	}
	spec, err := explicitSpec(req.modelRequest, period)
	if err != nil {
		return nil, err
	}
	tr, err := fixedTransform(raw, period, req)
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
func fixedTransform(raw []float64, period int, req fitRequest) (transform.Transform, error) {
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
		lam, err := transform.Guerrero(raw, max(period, 2), -1, 2)
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

// explicitSpec is the validated specification of fixed orders, the period
// of their seasonal part and the constant.
func explicitSpec(r modelRequest, period int) (arima.Spec, error) {
	if !r.seasonal {
		period = 0
	}
	s, err := arima.NewSpec(r.ord, r.sord, period, r.constant)
	if err != nil {
		var se *arima.SpecError
		if errors.As(err, &se) && (se.Field == "mean" || se.Field == "drift") {
			return s, badUsage("--constant %s with --model %q: %s", r.constant, r.model, se.Reason)
		}
		return s, usageError{fmt.Errorf("--model %q: %w", r.model, err)}
	}
	return s, nil
}

// fitOutput is the JSON document of CONTRACT.md §3, plus note and, for an
// automatic choice, the candidates tried.
type fitOutput struct {
	Model              fitModel      `json:"model"`
	Estimates          fitTerms      `json:"estimates"`
	StdErrors          fitTerms      `json:"std_errors"`
	InnovationVariance float64       `json:"innovation_variance"`
	LogLikelihood      float64       `json:"log_likelihood"`
	AIC                float64       `json:"aic"`
	AICc               jsonFloat     `json:"aicc"`
	BIC                float64       `json:"bic"`
	ObservationsUsed   int           `json:"observations_used"`
	Converged          bool          `json:"converged"`
	Note               string        `json:"note,omitempty"`
	Forecast           []fitForecast `json:"forecast"`
	// Candidates are the fits the automatic choice tried, in order.
	Candidates []fitCandidate `json:"candidates,omitempty"`

	spec   arima.Spec
	levels []float64
	times  []string  // CSV time column, nil without one
	values []float64 // raw series
}

type fitModel struct {
	Label         string      `json:"label"`
	ARIMA         [3]int      `json:"arima"`
	SeasonalARIMA [3]int      `json:"seasonal_arima"`
	Seasons       []fitSeason `json:"seasons"`
	Constant      string      `json:"constant"`
	Transform     string      `json:"transform"`
}

// fitSeason is one seasonal cycle of the model and the terms that carry
// it: "arima" (the seasonal orders), "fourier" (Pairs sin/cos pairs,
// harmonics 1…Pairs) or "none" (the automatic choice found the cycle not
// worth any terms). Steps need not be whole.
type fitSeason struct {
	Steps float64 `json:"steps"`
	Terms string  `json:"terms"`
	Pairs int     `json:"pairs,omitempty"`
}

// choiceFilter is the online filter of a choice: with Fourier terms it
// computes them from the data time of each row (Choice.Start, Step).
func choiceFilter(ch *auto.Choice, h int) (*arima.Filter, error) {
	return ch.Filter(h)
}

// seasonsOf lists the choice per cycle for the JSON model.
func seasonsOf(ch *auto.Choice) []fitSeason {
	out := []fitSeason{}
	for _, c := range ch.Seasons {
		fs := fitSeason{Steps: c.Steps, Terms: c.Terms}
		if c.Terms == auto.TermsFourier {
			fs.Pairs = c.K
		}
		out = append(out, fs)
	}
	return out
}

// regressionNames names the Fourier columns for the output, in forewarn's
// own spelling with the cycle in steps: "sin<k>/<m>" and "cos<k>/<m>", the
// sine and cosine of harmonic k of the cycle of m steps. (The engine's
// column names follow R forecast's fourier(), "S<k>-<L>" and "C<k>-<L>"
// with L in seconds, so that its tests can compare them with R's.)
func regressionNames(ch *auto.Choice) []string {
	if ch.Profile != nil {
		// one seasonal-shape column per cycle: "profile/<m>"
		var names []string
		for _, L := range ch.ProfileCycles {
			names = append(names, "profile/"+strconv.FormatFloat(L/ch.Step, 'g', 6, 64))
		}
		return names
	}
	if ch.Fourier == nil {
		return nil
	}
	names := ch.Fourier.Names()
	for i, nm := range names {
		j := strings.LastIndexByte(nm, '-')
		if j < 1 {
			continue
		}
		fn := map[byte]string{'S': "sin", 'C': "cos"}[nm[0]]
		L, err := strconv.ParseFloat(nm[j+1:], 64)
		if fn == "" || err != nil || ch.Step <= 0 {
			continue
		}
		names[i] = fn + nm[1:j] + "/" + strconv.FormatFloat(L/ch.Step, 'g', 6, 64)
	}
	return names
}

func regressionTerms(names []string, v []float64) []fitRegression {
	out := []fitRegression{}
	for i, nm := range names {
		if i < len(v) {
			out = append(out, fitRegression{Name: nm, Value: jsonFloat(v[i])})
		}
	}
	return out
}

// fitTerms holds one number per estimated term: the estimates, or their
// standard errors. mean and drift are null when not estimated.
type fitTerms struct {
	Phi           []jsonFloat     `json:"phi"`
	Theta         []jsonFloat     `json:"theta"`
	SeasonalPhi   []jsonFloat     `json:"seasonal_phi"`
	SeasonalTheta []jsonFloat     `json:"seasonal_theta"`
	Mean          *jsonFloat      `json:"mean"`
	Drift         *jsonFloat      `json:"drift"`
	Regression    []fitRegression `json:"regression"`
}

// fitRegression is one other estimated term: a Fourier coefficient.
type fitRegression struct {
	Name  string    `json:"name"`
	Value jsonFloat `json:"value"`
}

type fitForecast struct {
	H      int       `json:"h"`
	Mean   jsonFloat `json:"mean"`
	Median jsonFloat `json:"median"`
	SD     jsonFloat `json:"sd"`
	Bands  []fitBand `json:"bands"`
}

// fitBand is the central prediction interval at one level, in raw units;
// an unbounded side is null.
type fitBand struct {
	Level float64   `json:"level"`
	Low   jsonFloat `json:"low"`
	High  jsonFloat `json:"high"`
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
	var ch *auto.Choice
	if req.fixed() || len(req.cycles) == 0 {
		period, err := req.period(times, req.file)
		if err != nil {
			return nil, err
		}
		if ch, err = fitChoice(raw, period, req); err != nil {
			return nil, err
		}
	} else {
		seasons, step, start, err := req.seasonsOptions(times, req.file, len(raw))
		if err != nil {
			return nil, err
		}
		ch, err = selectModel(raw, req, auto.Options{Seasons: seasons, Step: step, Start: start,
			Transform: req.transform, Model: req.model, Constant: req.constant})
		if err != nil {
			return nil, err
		}
	}
	w, err := forwardSeries(ch.Transform, raw, req.file)
	if err != nil {
		return nil, err
	}
	f, err := choiceFilter(ch, req.horizon)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", req.file, err)
	}
	f.Steps(w)
	mean := make([]float64, req.horizon)
	variance := make([]float64, req.horizon)
	f.Forecast(mean, variance)
	out := buildFitOutput(ch.Result, ch.Transform, mean, variance, req.levels)
	if ch.Seasons != nil {
		out.Model.Seasons = seasonsOf(ch)
		names := regressionNames(ch)
		out.Estimates.Regression = regressionTerms(names, ch.Result.Model.Beta)
		se := ch.Result.StdErr
		if nx := ch.Spec.NX; len(se) >= nx {
			out.StdErrors.Regression = regressionTerms(names, se[len(se)-nx:])
		}
	}
	for _, c := range ch.Tried {
		fc := fitCandidate{Label: c.Spec.Label(), Orders: c.Spec.Orders(), Constant: c.Spec.ConstantName(),
			Transform: c.Transform, AICc: jsonFloat(c.AICc), Status: "fitted", Reason: c.Err}
		if c.Err != "" {
			fc.Status = "rejected"
		}
		fc.Chosen = c.Err == "" && c.Spec == ch.Spec && c.Transform == ch.Transform.String()
		out.Candidates = append(out.Candidates, fc)
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
		Title:  fmt.Sprintf("%s: %s, transform %s", filepath.Base(req.file), out.Model.Label, out.Model.Transform),
		Times:  out.times,
		Values: out.values,
		Levels: req.levels,
	}
	for _, fc := range out.Forecast {
		lo, hi := make([]float64, len(fc.Bands)), make([]float64, len(fc.Bands))
		for i, b := range fc.Bands {
			lo[i], hi[i] = float64(b.Low), float64(b.High)
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

// fitCandidate is one model the automatic choice tried: its label and
// orders, the transform, the AICc on the raw scale (null when rejected),
// whether it was fitted or rejected and why, and whether it was chosen.
type fitCandidate struct {
	Label     string    `json:"label"`
	Orders    string    `json:"orders"`
	Constant  string    `json:"constant"`
	Transform string    `json:"transform"`
	AICc      jsonFloat `json:"aicc"`
	Status    string    `json:"status"` // "fitted" or "rejected"
	Reason    string    `json:"reason,omitempty"`
	Chosen    bool      `json:"chosen,omitempty"`
}

// buildFitOutput assembles the JSON document from the fit and the
// model-scale forecast N(mean[h], variance[h]) (CONTRACT.md §3): sd stays
// on the model scale; mean, median and bands are in raw units (toRawUnits),
// a value outside the inverse's domain printed as null.
func buildFitOutput(res *arima.Result, tr transform.Transform, mean, variance, levels []float64) *fitOutput {
	m := res.Model
	s := m.Spec
	out := &fitOutput{
		Model: fitModel{Label: s.Label(), ARIMA: [3]int{s.P, s.D, s.Q}, SeasonalARIMA: [3]int{s.SP, s.SD, s.SQ},
			Seasons: []fitSeason{}, Constant: s.ConstantName(), Transform: tr.String()},
		InnovationVariance: m.Sigma2,
		LogLikelihood:      res.LogLik,
		AIC:                res.AIC,
		AICc:               jsonFloat(res.AICc),
		BIC:                res.BIC,
		ObservationsUsed:   res.NObs,
		Converged:          res.Converged,
		Note:               res.Note,
		spec:               s,
		levels:             levels,
	}
	if s.Period > 0 {
		out.Model.Seasons = append(out.Model.Seasons, fitSeason{Steps: float64(s.Period), Terms: "arima"})
	}
	out.Estimates = termsOf(s, m.Params())
	se := res.StdErr
	if len(se) != s.NumParams() {
		se = make([]float64, s.NumParams())
		for i := range se {
			se[i] = math.NaN()
		}
	}
	out.StdErrors = termsOf(s, se)
	raw := toRawUnits(tr, mean, variance, levels)
	for h := range mean {
		fc := fitForecast{H: h + 1,
			Mean:   jsonFloat(raw.Mean[h]),
			Median: jsonFloat(raw.Median[h]),
			SD:     jsonFloat(math.Sqrt(variance[h])),
			Bands:  make([]fitBand, len(levels))}
		for i, l := range levels {
			fc.Bands[i] = fitBand{Level: l, Low: jsonFloat(raw.Lower[i][h]), High: jsonFloat(raw.Upper[i][h])}
		}
		out.Forecast = append(out.Forecast, fc)
	}
	return out
}

// termsOf splits v, in arima.Model.Params layout (φ, θ, Φ, Θ, then the
// mean or the drift), into its named blocks.
func termsOf(s arima.Spec, v []float64) fitTerms {
	block := func(k int) []jsonFloat {
		out := make([]jsonFloat, k)
		for i := range out {
			out[i] = jsonFloat(v[i])
		}
		v = v[k:]
		return out
	}
	t := fitTerms{Phi: block(s.P), Theta: block(s.Q), SeasonalPhi: block(s.SP), SeasonalTheta: block(s.SQ),
		Regression: []fitRegression{}}
	if s.Mean || s.Drift {
		c := jsonFloat(v[0])
		if s.Mean {
			t.Mean = &c
		} else {
			t.Drift = &c
		}
	}
	return t
}

// writeFitTable prints the fit for a person, in forewarn's own layout: a
// header line with the model's label; the estimated terms, one a row with
// their symbol (Box & Jenkins 1976: φ, θ for the AR and MA terms, Φ, Θ for
// the seasonal ones) and the lag they act at; a block of fit measures, one
// a line; the models tried, for an automatic choice; and the forecast, the
// bands of each level as "low … high".
func writeFitTable(w io.Writer, out *fitOutput, file string) {
	fmt.Fprintf(w, "%s   transform %s   %s\n\n", out.Model.Label, out.Model.Transform, file)

	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	terms := termRows(out)
	if len(terms) == 0 {
		fmt.Fprintln(tw, "  no estimated terms: the model is pure differencing and noise")
	} else {
		fmt.Fprintln(tw, "  term\t estimate\t std error\t acts on")
		for _, r := range terms {
			fmt.Fprintf(tw, "  %s\t %s\t %s\t %s\n", r.symbol, fmtNum(r.est), fmtNum(r.se), r.role)
		}
	}
	tw.Flush()
	fmt.Fprintln(w)

	fmt.Fprintf(w, "  fitted to %d observations (after differencing)\n", out.ObservationsUsed)
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "  innovation variance σ²\t%s\n", fmtNum(out.InnovationVariance))
	fmt.Fprintf(tw, "  log-likelihood\t%s\n", fmtNum(out.LogLikelihood))
	fmt.Fprintf(tw, "  AIC\t%s\n", fmtNum(out.AIC))
	fmt.Fprintf(tw, "  AICc\t%s\n", fmtNum(float64(out.AICc)))
	fmt.Fprintf(tw, "  BIC\t%s\n", fmtNum(out.BIC))
	tw.Flush()
	if !out.Converged {
		fmt.Fprintf(w, "  the optimiser did not converge: %s\n", out.Note)
	} else if out.Note != "" {
		fmt.Fprintf(w, "  note: %s\n", out.Note)
	}

	if len(out.Candidates) > 0 {
		fmt.Fprintf(w, "\nmodels tried, in order (AICc on the raw scale)\n")
		tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		for i, c := range out.Candidates {
			verdict := "AICc " + fmtNum(float64(c.AICc))
			if c.Status == "rejected" {
				verdict = "rejected: " + c.Reason
			}
			mark := ""
			if c.Chosen {
				mark = "  ← chosen"
			}
			fmt.Fprintf(tw, "  %d\t%s\t%s\t%s%s\n", i+1, c.Label, c.Transform, verdict, mark)
		}
		tw.Flush()
	}

	fmt.Fprintf(w, "\nforecast, %d steps (sd on the model scale; mean, median and bands in raw units)\n", len(out.Forecast))
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprint(tw, "h\tmean\tmedian\tsd\t")
	for _, l := range out.levels {
		fmt.Fprintf(tw, "%s%% band\t", levelKey(l))
	}
	fmt.Fprintln(tw)
	for _, fc := range out.Forecast {
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t", fc.H, fmtNum(float64(fc.Mean)), fmtNum(float64(fc.Median)), fmtNum(float64(fc.SD)))
		for _, b := range fc.Bands {
			fmt.Fprintf(tw, "%s … %s\t", fmtBound(float64(b.Low)), fmtBound(float64(b.High)))
		}
		fmt.Fprintln(tw)
	}
	tw.Flush()
}

// termRow is one estimated term of the table.
type termRow struct {
	symbol  string
	est, se float64
	role    string
}

// termRows lists the estimated terms with their symbols, e.g. θ₁ "MA,
// lag 1", Θ₁ "seasonal MA, lag 12".
func termRows(out *fitOutput) []termRow {
	s := out.spec
	var rows []termRow
	add := func(sym, kind string, lagStep int, est, se []jsonFloat) {
		for i := range est {
			rows = append(rows, termRow{sym + subscript(i+1), float64(est[i]), float64(se[i]),
				fmt.Sprintf("%s, lag %d", kind, (i+1)*lagStep)})
		}
	}
	e, se := out.Estimates, out.StdErrors
	add("φ", "AR", 1, e.Phi, se.Phi)
	add("θ", "MA", 1, e.Theta, se.Theta)
	add("Φ", "seasonal AR", s.Period, e.SeasonalPhi, se.SeasonalPhi)
	add("Θ", "seasonal MA", s.Period, e.SeasonalTheta, se.SeasonalTheta)
	if e.Mean != nil {
		rows = append(rows, termRow{"mean", float64(*e.Mean), float64(*se.Mean), "level of the series"})
	}
	if e.Drift != nil {
		rows = append(rows, termRow{"drift", float64(*e.Drift), float64(*se.Drift), "slope per step"})
	}
	return rows
}

// subscript writes n with the Unicode subscript digits (₀ … ₉).
func subscript(n int) string {
	var b strings.Builder
	for _, d := range strconv.Itoa(n) {
		b.WriteRune('₀' + (d - '0'))
	}
	return b.String()
}

// fmtBound writes a band bound; an unbounded one (outside the inverse
// transform's domain) is "open".
func fmtBound(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "open"
	}
	return fmtNum(v)
}

func fmtNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "-"
	}
	return strconv.FormatFloat(v, 'g', 6, 64)
}

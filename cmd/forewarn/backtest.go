package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"golang.org/x/term"

	"forewarn/engine/arima"
	"forewarn/engine/auto"
	"forewarn/engine/backtest"
)

func init() {
	register("backtest", "rolling-origin evaluation of a CSV series", runBacktest)
}

// backtestFlags are the flags of `forewarn backtest` (CONTRACT.md §3: those
// of fit plus --origins).
type backtestFlags struct {
	order, seasonal, mean, trans, levels, column, format string
	period, horizon, origins                             int
}

func runBacktest(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("backtest", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var f backtestFlags
	fs.StringVar(&f.order, "order", "", "non-seasonal order `p,d,q` (absent: chosen automatically at each origin)")
	fs.StringVar(&f.seasonal, "seasonal", "", "seasonal order `P,D,Q` (needs --period)")
	fs.IntVar(&f.period, "period", 0, "seasonal period in steps (0 or 1: none)")
	fs.StringVar(&f.mean, "mean", "auto", "estimate a mean: yes, no or auto (a mean when d+D = 0)")
	fs.StringVar(&f.trans, "transform", "auto", "auto, none, log, boxcox, boxcox(λ) or scaled-exp")
	fs.IntVar(&f.horizon, "horizon", 0, "steps ahead (default: the period, or 10 without one)")
	fs.StringVar(&f.levels, "levels", "80,95", "prediction interval levels in percent")
	fs.StringVar(&f.column, "column", "", "value column (default: the last)")
	fs.StringVar(&f.format, "format", "table", "table or json")
	fs.IntVar(&f.origins, "origins", backtest.DefaultOrigins, "the last N possible forecast origins")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: forewarn backtest [flags] FILE")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return exitOK
		}
		return exitUsage
	}
	if fs.NArg() != 1 {
		fmt.Fprintln(stderr, "forewarn backtest: need exactly one CSV file")
		return exitUsage
	}
	cfg, err := f.config()
	if err != nil {
		fmt.Fprintf(stderr, "forewarn backtest: %v\n", err)
		return exitUsage
	}
	path := fs.Arg(0)
	_, y, err := readSeriesCSV(path, f.column)
	if err != nil {
		fmt.Fprintf(stderr, "forewarn backtest: %v\n", err)
		return exitUsage
	}
	var progress func(done, total int)
	if isTerminal(stderr) {
		progress = func(done, total int) { drawBar(stderr, done, total) }
	}
	rep, err := backtest.Run(y, cfg.bt, cfg.forecaster(), progress)
	if progress != nil {
		fmt.Fprintln(stderr)
	}
	if err != nil {
		fmt.Fprintf(stderr, "forewarn backtest: %s: %v\n", path, err)
		if errors.Is(err, backtest.ErrTooShort) || errors.Is(err, backtest.ErrBadOptions) {
			return exitUsage
		}
		return exitFailure
	}
	if f.format == "json" {
		if err := writeBacktestJSON(stdout, rep); err != nil {
			fmt.Fprintf(stderr, "forewarn backtest: %v\n", err)
			return exitFailure
		}
		return exitOK
	}
	writeBacktestTable(stdout, rep)
	return exitOK
}

// btConfig is the checked configuration of one backtest.
type btConfig struct {
	bt  backtest.Options
	sel auto.Options // Model is "auto" or a fixed spec
}

func (f *backtestFlags) config() (*btConfig, error) {
	var problems []string
	c := &btConfig{}
	if f.format != "table" && f.format != "json" {
		problems = append(problems, fmt.Sprintf("--format %q: want table or json", f.format))
	}
	if f.period < 0 {
		problems = append(problems, fmt.Sprintf("--period %d is negative", f.period))
	}
	if f.origins < 1 {
		problems = append(problems, fmt.Sprintf("--origins %d: need at least 1", f.origins))
	}
	levels, err := parseLevels(f.levels)
	if err != nil {
		problems = append(problems, err.Error())
	}
	h := f.horizon
	if h == 0 {
		h = 10
		if f.period > 1 {
			h = f.period
		}
	}
	if h < 1 {
		problems = append(problems, fmt.Sprintf("--horizon %d: need at least 1", f.horizon))
	}
	model, err := f.modelSpec()
	if err != nil {
		problems = append(problems, err.Error())
	}
	switch f.mean {
	case "auto", "yes", "no":
	default:
		problems = append(problems, fmt.Sprintf("--mean %q: want yes, no or auto", f.mean))
	}
	if len(problems) > 0 {
		return nil, errors.New(strings.Join(problems, "; "))
	}
	c.bt = backtest.Options{Horizon: h, Origins: f.origins, Period: f.period, Levels: levels}
	c.sel = auto.Options{Period: f.period, Transform: f.trans, Model: model, Mean: f.mean}
	return c, nil
}

// modelSpec turns --order/--seasonal/--period into a spec string, or
// "auto" without --order.
func (f *backtestFlags) modelSpec() (string, error) {
	if f.order == "" {
		if f.seasonal != "" {
			return "", errors.New("--seasonal needs --order")
		}
		return "auto", nil
	}
	s := "ARIMA(" + f.order + ")"
	if f.seasonal != "" {
		if f.period < 2 {
			return "", errors.New("--seasonal needs --period of at least 2")
		}
		s += "(" + f.seasonal + ")[" + strconv.Itoa(f.period) + "]"
	}
	if _, err := arima.ParseSpec(s); err != nil {
		return "", fmt.Errorf("--order/--seasonal: %w", err)
	}
	return s, nil
}

func parseLevels(s string) ([]float64, error) {
	var out []float64
	for _, p := range strings.Split(s, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
		if err != nil || !(v > 0 && v < 100) {
			return nil, fmt.Errorf("--levels %q: each level must be a number in (0, 100)", s)
		}
		out = append(out, v)
	}
	return out, nil
}

// forecaster fits at each origin (automatic choice unless the order is
// fixed) and forecasts in raw units.
func (c *btConfig) forecaster() backtest.Forecaster {
	return func(train []float64, h int, levels []float64) (backtest.Forecast, error) {
		ch, err := c.choose(train)
		if err != nil {
			return backtest.Forecast{}, err
		}
		return originForecast(ch, train, h, levels)
	}
}

// choose is the model choice at one origin (automatic unless the order
// is fixed; then only the transform may be chosen).
func (c *btConfig) choose(train []float64) (*auto.Choice, error) {
	return auto.Select(train, c.sel)
}

// originForecast runs the chosen model's filter over train and forecasts h
// steps in raw units (toRawUnits: the bias-adjusted mean, the bands mapped
// through the monotone inverse, NaN for an unbounded end).
func originForecast(ch *auto.Choice, train []float64, h int, levels []float64) (backtest.Forecast, error) {
	flt, err := arima.NewFilter(ch.Result.Model, h)
	if err != nil {
		return backtest.Forecast{}, err
	}
	w := make([]float64, len(train))
	if err := ch.Transform.ForwardSlice(w, train); err != nil {
		return backtest.Forecast{}, err
	}
	flt.Steps(w)
	mean, variance := make([]float64, h), make([]float64, h)
	flt.Forecast(mean, variance)
	raw := toRawUnits(ch.Transform, mean, variance, levels)
	return backtest.Forecast{Mean: raw.Mean, Lower: raw.Lower, Upper: raw.Upper}, nil
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

// drawBar redraws a one-line progress bar: "origins  7/20 |=======      |".
func drawBar(w io.Writer, done, total int) {
	const width = 30
	k := done * width / max(total, 1)
	fmt.Fprintf(w, "\rorigins %*d/%d |%s%s|", len(strconv.Itoa(total)), done, total,
		strings.Repeat("=", k), strings.Repeat(" ", width-k))
}

type btScores struct {
	MASE  jsonFloat `json:"mase"`
	SMAPE jsonFloat `json:"smape"`
}

type btJSON struct {
	Origins  int                  `json:"origins"`
	Horizon  int                  `json:"horizon"`
	MASE     jsonFloat            `json:"mase"`
	SMAPE    jsonFloat            `json:"smape"`
	Coverage map[string]jsonFloat `json:"coverage"`
	Baseline map[string]btScores  `json:"baseline"`
	Failed   int                  `json:"failed"`
	Errors   int                  `json:"errors"`
}

func writeBacktestJSON(w io.Writer, r *backtest.Report) error {
	out := btJSON{
		Origins: r.Origins, Horizon: r.Horizon,
		MASE: jsonFloat(r.Model.MASE), SMAPE: jsonFloat(r.Model.SMAPE),
		Coverage: map[string]jsonFloat{},
		Baseline: map[string]btScores{"seasonal_naive": {jsonFloat(r.Baseline.MASE), jsonFloat(r.Baseline.SMAPE)}},
		Failed:   r.Failed, Errors: r.Errors,
	}
	for i, l := range r.Levels {
		out.Coverage[levelKey(l)] = jsonFloat(r.Coverage[i])
	}
	enc := json.NewEncoder(w)
	return enc.Encode(out)
}

func writeBacktestTable(w io.Writer, r *backtest.Report) {
	fmt.Fprintf(w, "origins %d, horizon %d, %d errors scored", r.Origins, r.Horizon, r.Errors)
	if r.Failed > 0 {
		fmt.Fprintf(w, ", %d origins failed (last: %s)", r.Failed, r.LastErr)
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "%-16s %8s %8s\n", "", "MASE", "sMAPE %")
	fmt.Fprintf(w, "%-16s %8.4f %8.3f\n", "model", r.Model.MASE, r.Model.SMAPE)
	fmt.Fprintf(w, "%-16s %8.4f %8.3f\n", "seasonal naive", r.Baseline.MASE, r.Baseline.SMAPE)
	for i, l := range r.Levels {
		fmt.Fprintf(w, "coverage %s%%: %.1f%%\n", levelKey(l), 100*r.Coverage[i])
	}
}

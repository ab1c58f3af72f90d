package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"golang.org/x/term"

	"forewarn/engine/auto"
	"forewarn/engine/backtest"
	"forewarn/engine/calibrate"
)

func init() {
	register("backtest", "rolling-origin evaluation of a CSV series", runBacktest)
}

// backtestFlags are the flags of `forewarn backtest` (CONTRACT.md §3: those
// of fit plus --origins, --every and --calibrate).
type backtestFlags struct {
	modelFlags
	column, format string
	origins, every int
	calibrate      bool
}

func runBacktest(args []string, stdout, stderr io.Writer) int {
	if err := checkRetired(args); err != nil {
		fmt.Fprintf(stderr, "forewarn backtest: %v\n", err)
		return exitUsage
	}
	fs := flag.NewFlagSet("backtest", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var f backtestFlags
	f.register(fs, "auto")
	fs.StringVar(&f.column, "column", "", "value column (default: the last)")
	fs.StringVar(&f.format, "format", "table", "table or json")
	fs.IntVar(&f.origins, "origins", backtest.DefaultOrigins, "the number of forecast origins")
	fs.IntVar(&f.every, "every", 1, "steps between origins; the last origin is at n − h")
	fs.BoolVar(&f.calibrate, "calibrate", true, "calibrate the bands from the errors of forecasts before each origin (false: the model's own bands)")
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
	req, err := f.request()
	if err != nil {
		fmt.Fprintf(stderr, "forewarn backtest: %v\n", err)
		return exitUsage
	}
	path := fs.Arg(0)
	times, y, err := readSeriesCSV(path, f.column)
	if err != nil {
		fmt.Fprintf(stderr, "forewarn backtest: %v\n", err)
		return exitUsage
	}
	cfg, err := req.config(times, path, len(y))
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
		if err := writeBacktestJSON(stdout, rep, cfg.bt.Every); err != nil {
			fmt.Fprintf(stderr, "forewarn backtest: %v\n", err)
			return exitFailure
		}
		return exitOK
	}
	writeBacktestTable(stdout, rep, cfg)
	return exitOK
}

// btRequest is the checked command line of one backtest, before the file
// is read.
type btRequest struct {
	modelRequest
	origins, every int
	calibrate      bool
}

// request checks the flags; it lists every problem.
func (f *backtestFlags) request() (*btRequest, error) {
	mr, problems := f.check()
	if f.format != "table" && f.format != "json" {
		problems = append(problems, fmt.Sprintf("--format %q: want table or json", f.format))
	}
	if f.origins < 1 {
		problems = append(problems, fmt.Sprintf("--origins %d: need at least 1", f.origins))
	}
	if f.every < 1 {
		problems = append(problems, fmt.Sprintf("--every %d: need at least 1", f.every))
	}
	if len(problems) > 0 {
		return nil, errors.New(strings.Join(problems, "; "))
	}
	return &btRequest{modelRequest: *mr, origins: f.origins, every: f.every, calibrate: f.calibrate}, nil
}

// btConfig is the checked configuration of one backtest.
type btConfig struct {
	bt     backtest.Options
	sel    auto.Options // Model is "auto" or fixed orders
	period int          // the seasonal period in steps, 0 without one
	label  string       // the model asked for, for the table
	// calibrate: the bands at each origin are calibrated by
	// engine/calibrate, warm-started from the training data alone.
	calibrate bool
}

// config resolves the seasonal cycle against the file's times and builds
// the options of the backtest and of the model choice at each origin.
func (r *btRequest) config(times []string, file string, n int) (*btConfig, error) {
	if !r.fixed() && len(r.cycles) > 0 {
		return r.configSeasons(times, file, n)
	}
	period, err := r.period(times, file)
	if err != nil {
		return nil, err
	}
	label := "automatic choice"
	if r.fixed() {
		spec, err := explicitSpec(r.modelRequest, period)
		if err != nil {
			return nil, err
		}
		label = spec.Label()
	}
	return &btConfig{
		bt:        backtest.Options{Horizon: r.horizon, Origins: r.origins, Every: r.every, Period: period, Levels: r.levels},
		sel:       auto.Options{Period: period, Transform: r.transform, Model: r.model, Constant: r.constant},
		period:    period,
		label:     label,
		calibrate: r.calibrate,
	}, nil
}

// forecaster fits at each origin (automatic choice unless the order is
// fixed) and forecasts in raw units, with calibrated bands when asked.
// Choices are kept by training length for the one Run the forecaster
// serves (the training sets are prefixes of one series), so the refits
// behind the calibration are shared between neighbouring origins.
func (c *btConfig) forecaster() backtest.Forecaster {
	return c.forecasterWith(map[int]*auto.Choice{})
}

// forecasterWith is forecaster with the choices kept in cache, which may
// be shared by forecasters of the same series and model options (the
// choice depends only on the training prefix).
func (c *btConfig) forecasterWith(cache map[int]*auto.Choice) backtest.Forecaster {
	choose := func(train []float64) (*auto.Choice, error) {
		if ch := cache[len(train)]; ch != nil {
			return ch, nil
		}
		ch, err := c.choose(train)
		if err == nil {
			cache[len(train)] = ch
		}
		return ch, err
	}
	return func(train []float64, h int, levels []float64) (backtest.Forecast, error) {
		ch, err := choose(train)
		if err != nil {
			return backtest.Forecast{}, err
		}
		var thr []float64
		if c.calibrate {
			if thr, err = originThresholds(choose, train, h, levels); err != nil {
				return backtest.Forecast{}, err
			}
		}
		return originForecast(ch, train, h, levels, thr)
	}
}

// choose is the model choice at one origin (automatic unless the order
// is fixed; then only the transform may be chosen).
func (c *btConfig) choose(train []float64) (*auto.Choice, error) {
	return auto.Select(train, c.sel)
}

// originForecast runs the chosen model's filter over train and forecasts h
// steps in raw units (toRawUnits: the bias-adjusted mean, the bands mapped
// through the monotone inverse, NaN for an unbounded end). thr, when not
// nil, holds the calibrated multiplier of se per step and level
// (originThresholds); nil gives the model's own bands.
func originForecast(ch *auto.Choice, train []float64, h int, levels, thr []float64) (backtest.Forecast, error) {
	mean, variance, err := modelForecast(ch, train, h)
	if err != nil {
		return backtest.Forecast{}, err
	}
	raw := toRawUnitsWith(ch.Transform, mean, variance, levels, thr)
	return backtest.Forecast{Mean: raw.Mean, Lower: raw.Lower, Upper: raw.Upper}, nil
}

// modelForecast is the h-step forecast on the model's scale after
// filtering train with the chosen model.
func modelForecast(ch *auto.Choice, train []float64, h int) (mean, variance []float64, err error) {
	flt, err := choiceFilter(ch, h)
	if err != nil {
		return nil, nil, err
	}
	w := make([]float64, len(train))
	if err := ch.Transform.ForwardSlice(w, train); err != nil {
		return nil, nil, err
	}
	flt.Steps(w)
	mean, variance = make([]float64, h), make([]float64, h)
	flt.Forecast(mean, variance)
	return mean, variance, nil
}

// calOrigins is the most earlier origins whose out-of-sample errors
// calibrate the bands of one backtest origin. Learn takes each level's
// band from the ⌈(n + 1)(1 − α)⌉-th smallest error, which is finite at
// 95 % from n = 19 errors on; 48 origins give at least 37 errors per step
// at horizons up to 12, and bound the refits per origin.
const calOrigins = 48

// originThresholds are the calibrated multipliers of se at the origin
// len(train) (h × levels, step-major). They come from the errors of the
// forecasts made at the most recent earlier origins t = T − 1, T − 2, …
// (at most calOrigins of them, t ≥ T/2), each by the model chosen and
// fitted on train[:t] alone and scored on train[t:min(t+h, T)] on its own
// scale: every value they use lies before the origin (an origin less
// than h steps back scores its first steps only), and the refits carry
// the parameters' and the model choice's uncertainty (empirical
// out-of-sample intervals from rolling refits, Williams & Goodman 1971;
// Lee & Scholtes 2014; calibrate.Learn).
func originThresholds(choose func([]float64) (*auto.Choice, error), train []float64, h int, levels []float64) ([]float64, error) {
	T := len(train)
	errs := calibrate.NewErrors(h)
	actual := make([]float64, h)
	for k := 0; k < calOrigins; k++ {
		t := T - 1 - k
		if t < max(T/2, 2) {
			break
		}
		ch, err := choose(train[:t:t])
		if err != nil {
			continue
		}
		mean, variance, err := modelForecast(ch, train[:t:t], h)
		if err != nil {
			continue
		}
		a := actual[:min(h, T-t)]
		if err := ch.Transform.ForwardSlice(a, train[t:t+len(a)]); err != nil {
			continue
		}
		errs.Add(mean, variance, a)
	}
	lv := slices.Clone(levels)
	slices.Sort(lv)
	c, err := calibrate.New(calibrate.Options{Horizon: h, Levels: lv})
	if err != nil {
		return nil, err
	}
	if err := c.Learn(errs, calibrate.DefaultPrior); err != nil {
		return nil, fmt.Errorf("calibration: %w", err)
	}
	thr := make([]float64, h*len(levels))
	for li, l := range levels {
		k := slices.Index(lv, l)
		for j := 0; j < h; j++ {
			thr[j*len(levels)+li] = c.Threshold(j+1, k)
		}
	}
	return thr, nil
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
	Every    int                  `json:"every"`
	Horizon  int                  `json:"horizon"`
	MASE     jsonFloat            `json:"mase"`
	SMAPE    jsonFloat            `json:"smape"`
	Coverage map[string]jsonFloat `json:"coverage"`
	Baseline map[string]btScores  `json:"baseline"`
	Failed   int                  `json:"failed"`
	Errors   int                  `json:"errors"`
}

func writeBacktestJSON(w io.Writer, r *backtest.Report, every int) error {
	out := btJSON{
		Origins: r.Origins, Every: every, Horizon: r.Horizon,
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

// writeBacktestTable prints the scores for a person: what was evaluated,
// the model's and the baseline's scores side by side, and how often each
// band held the actual value against how often it should.
func writeBacktestTable(w io.Writer, r *backtest.Report, c *btConfig) {
	fmt.Fprintf(w, "%s, transform %s: %d origins %d step(s) apart, %d steps ahead, %d errors scored\n",
		c.label, c.sel.Transform, r.Origins, c.bt.Every, r.Horizon, r.Errors)
	if r.Failed > 0 {
		fmt.Fprintf(w, "%d origins failed (last: %s)\n", r.Failed, r.LastErr)
	}
	fmt.Fprintln(w)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "\tMASE\tsMAPE %\t")
	fmt.Fprintf(tw, "model\t%.4f\t%.3f\t\n", r.Model.MASE, r.Model.SMAPE)
	fmt.Fprintf(tw, "seasonal naive\t%.4f\t%.3f\t\n", r.Baseline.MASE, r.Baseline.SMAPE)
	tw.Flush()
	fmt.Fprintln(w)
	for i, l := range r.Levels {
		fmt.Fprintf(w, "%s%% band held the actual value %.1f%% of the time\n", levelKey(l), 100*r.Coverage[i])
	}
}

// configSeasons is config for the automatic choice with cycles given
// (several, or not whole numbers of steps): each origin chooses the terms
// per cycle (engine/auto); MASE is scaled at the shortest cycle, rounded
// to whole steps.
func (r *btRequest) configSeasons(times []string, file string, n int) (*btConfig, error) {
	seasons, step, start, err := r.seasonsOptions(times, file, n)
	if err != nil {
		return nil, err
	}
	short := math.Inf(1)
	for _, L := range seasons {
		short = math.Min(short, L/step)
	}
	period := int(math.Round(short))
	return &btConfig{
		bt: backtest.Options{Horizon: r.horizon, Origins: r.origins, Every: r.every, Period: period, Levels: r.levels},
		sel: auto.Options{Seasons: seasons, Step: step, Start: start, Transform: r.transform, Model: r.model,
			Constant: r.constant},
		period:    period,
		label:     "automatic choice",
		calibrate: r.calibrate,
	}, nil
}

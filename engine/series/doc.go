// Package series is the state machine of one metric series: it buckets
// observations, carries counter totals through resets, keeps the window of
// closed buckets, runs the online Kalman step of the fitted model on each
// closed bucket, turns model-scale forecasts into raw units, and steps its
// alert rules (EvaluateAlerts: events from data alone, states in the record).
//
// # Data time
//
// An observation at unix time t falls into bucket floor(t/step). A bucket
// closes when an observation of a later bucket arrives (or CloseOpen is
// called). Buckets without data are missing values, never zeros. Everything
// depends on data time only: the same sequence of observations gives the
// same forecasts, whatever the machine's speed, because refits are decided
// by the count of closed buckets (Settings.RefitEvery) and the forecast at
// a refit point waits for the refit (Outcome NeedFit, then Install).
// ObserveIn applies an observation of a message that carries several:
// refits that fall due inside one message are coalesced into one at the
// last bucket the message closes, a rule of the data too, since message
// boundaries are part of the input stream.
//
// # Counters
//
// For kind "counter" a drop in the raw value is a reset: the raw value
// starts a new segment and the total carries on through it (the total is
// raw + offset, and offset grows by the last raw value before the drop).
// Forecasts and bands of a counter never fall below its last closed value.
//
// # Concurrency
//
// A Series is owned by one goroutine. FitJob copies what a refit needs, so
// FitJob.Run may run on another goroutine while the owner holds later
// observations back; Install is again called by the owner.
//
// # Cycles, spikes and level shifts
//
// With Settings.Seasons and model auto a refit chooses per cycle seasonal
// ARIMA terms, Fourier pairs or nothing, or, with several cycles, the
// profile route (each cycle's seasonal shape as one column with
// coefficient 1, chosen by a holdout; auto.Select, as forewarn fit
// --seasons; a warm refit keeps the route); with Settings.Outliers it also looks for additive outliers,
// level shifts and temporary changes in the recent window (outlier.Detect)
// and fits them. Both become the model's regressors (design.go: column
// sets by kind), evaluated at each bucket's start in data time, so the
// phase survives restarts and gaps. Settings.Guard runs the filter's
// online check on every closed bucket; the forecast says what it made of
// the last one (Forecast.Taken).
//
// # Persistence
//
// Snapshot returns the plain record of everything needed to resume the
// series exactly; package state encodes it. Restore rebuilds a series from
// it; a record made under other settings keeps its window and refits.
package series

// Package chart draws the picture of one series that operators look at:
// the recent history, the median forecast, the central prediction
// intervals as filled bands, the thresholds of the alert rules that watch
// the series and markers where the model was refitted.
//
// # Contract
//
// Render and WriteFile are pure functions of a Data value and Options:
// they read nothing but their arguments, start no goroutine and keep no
// state between calls, so any number of goroutines may call them at once.
// The input is plain values (times, float64 slices) so that the offline
// "fit" command and the daemon's HTTP surface share the renderer without
// either depending on the other.
//
// # Units and conventions
//
//   - Times are instants; the time axis is labelled in UTC.
//   - Values are in raw units. A missing history value is NaN and breaks
//     the history line; it is never drawn as zero.
//   - Point.Lower[i] and Point.Upper[i] bound the central interval at
//     Data.Levels[i] percent. NaN or an infinity marks an unbounded
//     endpoint (outside the inverse transform's domain): the band then
//     runs to the edge of the plotting area.
//   - The value axis covers the history and the median forecast; bands
//     and thresholds widen it by at most one and a half times the span of
//     history and median on either side. Thresholds beyond that are named
//     in the legend as off the chart rather than squashing the data.
//
// # Speed
//
// A history longer than twice the chart's width in pixels is thinned for
// drawing by keeping the minimum and the maximum of each pixel column, so
// every peak and trough stays visible while the number of path segments
// stays proportional to the width, not to the length of the series.
package chart

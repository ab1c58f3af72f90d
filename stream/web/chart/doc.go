// Package chart draws the picture of one series that operators look at:
// the recent history, the median path of the forecast, one band per
// central prediction interval level, the thresholds of the alert rules
// that watch the series with their state, the forecast origin and markers
// where the model was refitted. DESIGN.md describes the look: palette,
// band rendering, legend wording, and how greyscale and colour-blind
// readability are checked.
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
//   - Values are in raw units; from 10 000 on, axis labels and thresholds
//     carry an SI prefix symbol after a space ("903 G", "1.93 M").
//   - A missing history value is NaN and breaks the history line; it is
//     never drawn as zero.
//   - Point.Lower[i] and Point.Upper[i] bound the central interval at
//     Data.Levels[i] percent; any number of levels may be given. NaN or an
//     infinity marks an unbounded endpoint (outside the inverse
//     transform's domain): the band then runs to the edge of the plotting
//     area.
//   - Each forecast step is drawn as a flat step of its band, centred on
//     its time and reaching half-way to its neighbours; the first step
//     begins half-way between the last history bucket and the first
//     forecast time, where the origin rule stands.
//   - Threshold.Raised is the alert's state in the ITU-T X.733 words the
//     legend uses: raised or cleared.
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

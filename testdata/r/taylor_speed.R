# Seconds of one fit of R forecast 8.20's dynamic harmonic regression on taylor, for the speed
# ratio of issue 12 (BenchmarkSelectTaylorVsR in engine/auto runs this script in the same run as
# forewarn's automatic choice on the same values, when Rscript is present).
# Run from the repository root:
#   Rscript testdata/r/taylor_speed.R [reps]
# Prints one JSON line: {"r": ..., "forecast": ..., "n": 3984, "dhr_seconds": [...], "stlm_seconds": [...]}
# The fit: auto.arima(x, xreg = fourier(msts(x, c(48, 336)), K = c(10, 10)), seasonal = FALSE) on
# taylor[1:3984] (the last origin of taylor_accuracy.R), elapsed time, single thread; and
# stlm(method = "arima") on the same values.
suppressPackageStartupMessages({library(forecast); library(jsonlite)})
args <- commandArgs(trailingOnly = TRUE)
reps <- if (length(args) > 0) as.integer(args[1]) else 1
x <- msts(as.numeric(taylor)[1:3984], seasonal.periods = c(48, 336))
dhr <- c(); st <- c()
for (i in seq_len(reps)) {
  t0 <- proc.time()[["elapsed"]]
  fit <- auto.arima(x, xreg = fourier(x, K = c(10, 10)), seasonal = FALSE)
  dhr <- c(dhr, proc.time()[["elapsed"]] - t0)
  t0 <- proc.time()[["elapsed"]]
  fs <- stlm(x, method = "arima")
  st <- c(st, proc.time()[["elapsed"]] - t0)
}
cat(toJSON(list(r = R.version.string, forecast = as.character(packageVersion("forecast")), n = length(x),
                dhr_seconds = I(dhr), stlm_seconds = I(st)), auto_unbox = TRUE, digits = NA), "\n")

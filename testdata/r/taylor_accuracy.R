# Accuracy on taylor, side by side: R forecast 8.20 (Debian r-cran-forecast) on R 4.2.2.
# Run from the repository root:
#   Rscript testdata/r/taylor_accuracy.R
# Writes testdata/r/taylor_accuracy.json.
#
# Origins one day apart (48 half-hours): the last 5 possible, 3792, 3840, ..., 3984 (the
# training set is x[1:origin]); horizon 48. For each origin and method the 48 point forecasts,
# and the in-sample scale of MASE (Hyndman & Koehler 2006): the mean absolute lag-336 naive
# error of the training set (the weekly cycle).
# Methods:
#   dhr    auto.arima(x, xreg = fourier(msts(x, c(48, 336)), K = c(10, 10)), seasonal = FALSE)
#          (dynamic harmonic regression; Hyndman & Athanasopoulos, FPP, complex seasonality)
#   stlm   stlm(msts(x, c(48, 336)), method = "arima") (MSTL plus ARIMA on the adjusted series)
#   snaive the value one week (336 half-hours) earlier
# Seconds per fit are recorded too (this machine, single thread).
suppressPackageStartupMessages({library(forecast); library(jsonlite)})
x <- as.numeric(taylor)
h <- 48
origins <- seq(3792, 3984, by = 48)
out <- list(r = R.version.string, forecast = as.character(packageVersion("forecast")),
            horizon = h, origins = origins, scale = c(), dhr = list(), stlm = list(), snaive = list(),
            actual = list(), dhr_seconds = c(), stlm_seconds = c())
for (o in origins) {
  tr <- msts(x[1:o], seasonal.periods = c(48, 336))
  out$scale <- c(out$scale, mean(abs(diff(x[1:o], lag = 336))))
  t0 <- proc.time()[["elapsed"]]
  fit <- auto.arima(tr, xreg = fourier(tr, K = c(10, 10)), seasonal = FALSE)
  fd <- forecast(fit, xreg = fourier(tr, K = c(10, 10), h = h))$mean
  out$dhr_seconds <- c(out$dhr_seconds, proc.time()[["elapsed"]] - t0)
  t0 <- proc.time()[["elapsed"]]
  fs <- forecast(stlm(tr, method = "arima"), h = h)$mean
  out$stlm_seconds <- c(out$stlm_seconds, proc.time()[["elapsed"]] - t0)
  key <- as.character(o)
  out$dhr[[key]] <- as.numeric(fd)
  out$stlm[[key]] <- as.numeric(fs)
  out$snaive[[key]] <- x[(o - 336 + 1):(o - 336 + h)]
  out$actual[[key]] <- x[(o + 1):(o + h)]
}
mase <- function(m) mean(sapply(seq_along(origins), function(i) {
  k <- as.character(origins[i]); mean(abs(out[[m]][[k]] - out$actual[[k]])) / out$scale[i] }))
out$mase <- list(dhr = mase("dhr"), stlm = mase("stlm"), snaive = mase("snaive"))
print(out$mase)
write_json(out, "testdata/r/taylor_accuracy.json", digits = NA, auto_unbox = TRUE, pretty = TRUE)

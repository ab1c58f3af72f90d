# Accuracy on a second open multi-seasonal series, side by side: R forecast 8.20 (Debian
# r-cran-forecast) on R 4.2.2.
# Series: Chicago in R package modeldata 1.1.0 (Debian r-cran-modeldata): daily rides
# (thousands) entering the Clark/Lake station of the Chicago "L", 2001-01-22 to 2016-08-28,
# 5 698 days, complete; cycles of 7 days and 365.25 days.
# Run from the repository root:
#   Rscript testdata/r/chicago_accuracy.R
# Writes testdata/r/chicago_accuracy.json (the series too, so the Go test needs no R).
#
# Origins one week apart, the last 8 possible (the training set is x[1:origin]); horizon 7.
# MASE (Hyndman & Koehler 2006) scaled by the in-sample mean absolute lag-7 naive error.
# Methods:
#   dhr    auto.arima(x, xreg = fourier(msts(x, c(7, 365.25)), K = c(3, 10)), seasonal = FALSE)
#          (K: the largest for the weekly cycle, and the cap of 10 that forewarn searches up to)
#   stlm   stlm(msts(x, c(7, 365.25)), method = "arima")
#   snaive the value one week earlier
suppressPackageStartupMessages({library(forecast); library(jsonlite)})
data(Chicago, package = "modeldata")
x <- as.numeric(Chicago$ridership)
h <- 7
origins <- length(x) - h * (8:1)
out <- list(r = R.version.string, forecast = as.character(packageVersion("forecast")),
            modeldata = as.character(packageVersion("modeldata")), first_date = as.character(Chicago$date[1]),
            horizon = h, origins = origins, scale = c(), dhr = list(), stlm = list(), snaive = list(),
            actual = list(), dhr_seconds = c(), stlm_seconds = c(), x = x)
for (o in origins) {
  tr <- msts(x[1:o], seasonal.periods = c(7, 365.25))
  out$scale <- c(out$scale, mean(abs(diff(x[1:o], lag = 7))))
  t0 <- proc.time()[["elapsed"]]
  fit <- auto.arima(tr, xreg = fourier(tr, K = c(3, 10)), seasonal = FALSE)
  fd <- forecast(fit, xreg = fourier(tr, K = c(3, 10), h = h))$mean
  out$dhr_seconds <- c(out$dhr_seconds, proc.time()[["elapsed"]] - t0)
  t0 <- proc.time()[["elapsed"]]
  fs <- forecast(stlm(tr, method = "arima"), h = h)$mean
  out$stlm_seconds <- c(out$stlm_seconds, proc.time()[["elapsed"]] - t0)
  key <- as.character(o)
  out$dhr[[key]] <- as.numeric(fd)
  out$stlm[[key]] <- as.numeric(fs)
  out$snaive[[key]] <- x[(o - 7 + 1):(o - 7 + h)]
  out$actual[[key]] <- x[(o + 1):(o + h)]
  cat(o, out$dhr_seconds[length(out$dhr_seconds)], out$stlm_seconds[length(out$stlm_seconds)], "\n")
}
mase <- function(m) mean(sapply(seq_along(origins), function(i) {
  k <- as.character(origins[i]); mean(abs(out[[m]][[k]] - out$actual[[k]])) / out$scale[i] }))
out$mase <- list(dhr = mase("dhr"), stlm = mase("stlm"), snaive = mase("snaive"))
print(out$mase)
write_json(out, "testdata/r/chicago_accuracy.json", digits = NA, auto_unbox = TRUE, pretty = TRUE)

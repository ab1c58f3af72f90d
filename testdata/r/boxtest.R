# Ljung-Box reference values for forewarn/engine/stationarity.LjungBox.
# Library: R 4.2.2 `stats` (Box.test, arima, acf) and `datasets`. Writes testdata/r/boxtest.json.
# Run from the repository root:  Rscript testdata/r/boxtest.R
# Each case stores its input vector (null = NA) so that the Go test needs no fitter.
num <- function(v) ifelse(is.na(v), "null", formatC(v, digits = 17, format = "g"))
cases <- list(
  list(name = "diff(log(AirPassengers))", x = diff(log(AirPassengers)), lag = 12, fitdf = 0),
  list(name = "diff(log(AirPassengers))", x = diff(log(AirPassengers)), lag = 24, fitdf = 2),
  list(name = "Nile", x = Nile, lag = 10, fitdf = 0),
  list(name = "residuals(arima(LakeHuron, order = c(2,0,0)))",
       x = residuals(arima(LakeHuron, order = c(2, 0, 0))), lag = 10, fitdf = 2),
  list(name = "residuals(arima(USAccDeaths, order = c(0,1,1), seasonal = c(0,1,1)))",
       x = residuals(arima(USAccDeaths, order = c(0, 1, 1), seasonal = list(order = c(0, 1, 1)))),
       lag = 12, fitdf = 2),
  # presidents has 6 NAs: Box.test passes them to acf(na.action = na.pass) and uses
  # n = number of non-missing values.
  list(name = "presidents (6 NA)", x = presidents, lag = 8, fitdf = 0),
  list(name = "residuals(arima(presidents, order = c(1,0,0)))",
       x = residuals(arima(presidents, order = c(1, 0, 0))), lag = 6, fitdf = 1)
)
out <- c("{", sprintf(' "library": "%s stats",', R.version.string), ' "cases": [')
for (i in seq_along(cases)) {
  k <- cases[[i]]
  b <- Box.test(k$x, lag = k$lag, type = "Ljung-Box", fitdf = k$fitdf)
  out <- c(out, sprintf('  {"name": "%s", "lag": %d, "fitdf": %d, "q": %s, "p": %s, "df": %d,',
                        k$name, k$lag, k$fitdf, num(unname(b$statistic)), num(b$p.value),
                        as.integer(b$parameter)),
           sprintf('   "x": [%s]}%s', paste(num(as.numeric(k$x)), collapse = ", "),
                   if (i < length(cases)) "," else ""))
}
out <- c(out, " ]", "}")
writeLines(out, file.path("testdata", "r", "boxtest.json"))

# Coverage of R's automatic ARIMA on the panel of cmd/forewarn TestBacktestAccuracy
# (open series of R 4.2.2 `datasets`, read from testdata/datasets/NAME.csv so that R and
# forewarn see the same numbers), at the same rolling origins: the last 12 training
# lengths T = n − h − 11, …, n − h, one step apart, horizon h per series.
#
# At each origin: fit <- forecast::auto.arima(ts(y[1:T], frequency = m)) with its defaults
# (Hyndman & Khandakar 2008; no transform), fc <- forecast(fit, h, level = c(80, 95));
# an actual y[T + j] counts as covered when lower ≤ y ≤ upper. Per series: the share
# covered over all origins and steps; the mean absolute coverage error (MACE) is the mean
# over series of |coverage − nominal|, per level and over both levels.
#
# Requires R 4.2.2 and forecast 8.20 (Debian r-base-core, r-cran-forecast).
# Run from the repository root:
#   Rscript testdata/backtest/coverage_panel.R > testdata/backtest/coverage_panel.json
suppressPackageStartupMessages(library(forecast))

cases <- list(
  list("AirPassengers", 12, 12), list("USAccDeaths", 12, 12), list("ldeaths", 12, 12),
  list("nottem", 12, 12), list("co2", 12, 12), list("UKgas", 4, 4),
  list("JohnsonJohnson", 4, 4), list("austres", 4, 4), list("Nile", 1, 5),
  list("LakeHuron", 1, 5), list("WWWusage", 1, 5), list("lynx", 1, 5), list("BJsales", 1, 5)
)
origins <- 12
levels <- c(80, 95)

fmt <- function(x) format(x, digits = 15)
rows <- c()
errs <- matrix(0, 0, 2)
for (c in cases) {
  name <- c[[1]]; m <- c[[2]]; h <- c[[3]]
  y <- read.csv(file.path("testdata", "datasets", paste0(name, ".csv")))$value
  n <- length(y)
  hit <- c(0, 0); cnt <- 0; ae <- 0; models <- c()
  for (T in (n - h - origins + 1):(n - h)) {
    fit <- auto.arima(ts(y[1:T], frequency = m))
    fc <- forecast(fit, h = h, level = levels)
    a <- y[(T + 1):(T + h)]
    for (l in 1:2) hit[l] <- hit[l] + sum(a >= fc$lower[, l] & a <= fc$upper[, l])
    cnt <- cnt + h
    models <- c(models, as.character(fit))
  }
  cov <- hit / cnt
  errs <- rbind(errs, abs(cov - levels / 100))
  rows <- c(rows, sprintf("    {\"name\": \"%s\", \"period\": %d, \"horizon\": %d, \"coverage\": {\"80\": %s, \"95\": %s}, \"model_at_last_origin\": \"%s\"}",
    name, m, h, fmt(cov[1]), fmt(cov[2]), models[length(models)]))
}
cat("{\n")
cat(sprintf("  \"source\": \"%s, forecast %s: auto.arima defaults, testdata/backtest/coverage_panel.R\",\n",
  R.version.string, as.character(packageVersion("forecast"))))
cat(sprintf("  \"origins\": %d,\n  \"series\": [\n%s\n  ],\n", origins, paste(rows, collapse = ",\n")))
cat(sprintf("  \"mace\": {\"80\": %s, \"95\": %s, \"both\": %s}\n}\n",
  fmt(mean(errs[, 1])), fmt(mean(errs[, 2])), fmt(mean(errs))))

# Coverage of R's automatic ARIMA on the panel of cmd/forewarn TestBacktestAccuracy
# (open series of R 4.2.2 `datasets`, read from testdata/datasets/NAME.csv so that R and
# forewarn see the same numbers), at the same rolling origins: every training length
# T = ⌈n/2⌉, …, n − h, one step apart (the second half of each series), horizon h per series.
#
# Why so many origins: consecutive origins share most of their realised future, so the
# coverage of a few origins is mostly noise. A perfectly calibrated forecaster (seeded
# simulations from each series' own model, cmd/forewarn TestCoveragePanelNoiseFloor) gets a
# MACE at 80 % of 0.098 on average (90 % range 0.068–0.135) with the 12 last origins, and
# 0.051 (0.034–0.070) with every origin over the second half; at 95 %, 0.048 and 0.026.
#
# At each origin: fit <- forecast::auto.arima(ts(y[1:T], frequency = m)) with its defaults
# (Hyndman & Khandakar 2008; no transform), fc <- forecast(fit, h, level = c(80, 95));
# an actual y[T + j] counts as covered when lower ≤ y ≤ upper. Per series: the share
# covered over all origins and steps; the mean absolute coverage error (MACE) is the mean
# over series of |coverage − nominal|, per level and over both levels. by_step holds the
# coverage per step ahead j = 1..h, over the same origins (for pooling by step).
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
levels <- c(80, 95)

fmt <- function(x) format(x, digits = 15)
rows <- c()
errs <- matrix(0, 0, 2)
for (c in cases) {
  name <- c[[1]]; m <- c[[2]]; h <- c[[3]]
  y <- read.csv(file.path("testdata", "datasets", paste0(name, ".csv")))$value
  n <- length(y)
  hit <- c(0, 0); cnt <- 0; models <- c()
  step <- matrix(0, h, 2)
  first <- ceiling(n / 2)
  for (T in first:(n - h)) {
    fit <- auto.arima(ts(y[1:T], frequency = m))
    fc <- forecast(fit, h = h, level = levels)
    a <- y[(T + 1):(T + h)]
    for (l in 1:2) {
      inside <- a >= fc$lower[, l] & a <= fc$upper[, l]
      hit[l] <- hit[l] + sum(inside)
      step[, l] <- step[, l] + inside
    }
    cnt <- cnt + h
    models <- c(models, as.character(fit))
  }
  cov <- hit / cnt
  origins <- n - h - first + 1
  bystep <- step / origins
  errs <- rbind(errs, abs(cov - levels / 100))
  rows <- c(rows, sprintf("    {\"name\": \"%s\", \"period\": %d, \"horizon\": %d, \"origins\": %d, \"coverage\": {\"80\": %s, \"95\": %s}, \"by_step\": {\"80\": [%s], \"95\": [%s]}, \"model_at_last_origin\": \"%s\"}",
    name, m, h, origins, fmt(cov[1]), fmt(cov[2]), paste(fmt(bystep[, 1]), collapse = ", "),
    paste(fmt(bystep[, 2]), collapse = ", "), models[length(models)]))
}
cat("{\n")
cat(sprintf("  \"source\": \"%s, forecast %s: auto.arima defaults, testdata/backtest/coverage_panel.R\",\n",
  R.version.string, as.character(packageVersion("forecast"))))
cat("  \"design\": \"every origin T = ceiling(n/2), ..., n - h\",\n")
cat(sprintf("  \"series\": [\n%s\n  ],\n", paste(rows, collapse = ",\n")))
cat(sprintf("  \"mace\": {\"80\": %s, \"95\": %s, \"both\": %s}\n}\n",
  fmt(mean(errs[, 1])), fmt(mean(errs[, 2])), fmt(mean(errs))))

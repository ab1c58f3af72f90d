# Coverage of R's automatic ARIMA on the panel of cmd/forewarn TestBacktestAccuracy
# (open series of R 4.2.2 `datasets`, read from testdata/datasets/NAME.csv so that R and
# forewarn see the same numbers), at the same rolling origins: training lengths
# T = n − h, n − h − k, n − h − 2k, … down to ⌈n/2⌉ (the second half of each series, every
# k-th origin, the last at n − h as in `forewarn backtest --every k`), horizon h per series.
#
# Why so many origins: consecutive origins share most of their realised future, so the
# coverage of a few origins is mostly noise. cmd/forewarn TestCoveragePanelNoiseFloor
# simulates a perfectly calibrated forecaster on this design (seeded simulations from each
# series' own model) and logs its MACE: the design must leave room to show 0.06.
#
# The stride k is the first argument (default 1); later arguments NAME=k set it for one
# series (co2's early seasonal fits take R a minute each on a loaded machine). Each
# origin's result is kept in a cache file (environment variable PANEL_CACHE, default
# testdata/backtest/coverage_panel_origins.csv; one line per series and origin), so a run
# with k = 2 reuses the origins of a run with k = 4, and an interrupted run resumes. R
# refits auto.arima at every origin either way. The series are computed shortest first.
#
# At each origin: fit <- forecast::auto.arima(ts(y[1:T], frequency = m)) with its defaults
# (Hyndman & Khandakar 2008; no transform), fc <- forecast(fit, h, level = c(80, 95));
# an actual y[T + j] counts as covered when lower ≤ y ≤ upper. Per series: the share
# covered over all origins and steps; the mean absolute coverage error (MACE) is the mean
# over series of |coverage − nominal|, per level and over both levels. by_step holds the
# coverage per step ahead j = 1..h, over the same origins (for pooling by step).
#
# Requires R 4.2.2 and forecast 8.20 (Debian r-base-core, r-cran-forecast).
# Run from the repository root (progress goes to stderr):
#   Rscript testdata/backtest/coverage_panel.R 2 > testdata/backtest/coverage_panel.json
suppressPackageStartupMessages(library(forecast))

args <- commandArgs(trailingOnly = TRUE)
stride <- if (length(args) >= 1) as.integer(args[1]) else 1L
stopifnot(!is.na(stride), stride >= 1)
strides <- list()
for (a in args[-1]) {
  kv <- strsplit(a, "=", fixed = TRUE)[[1]]
  strides[[kv[1]]] <- as.integer(kv[2])
  stopifnot(length(kv) == 2, !is.na(strides[[kv[1]]]), strides[[kv[1]]] >= 1)
}
cachefile <- Sys.getenv("PANEL_CACHE", file.path("testdata", "backtest", "coverage_panel_origins.csv"))
cache <- list()
if (file.exists(cachefile)) {
  for (ln in readLines(cachefile)) {
    f <- strsplit(ln, ";", fixed = TRUE)[[1]]
    cache[[paste(f[1], f[2])]] <- f
  }
}

cases <- list(
  list("AirPassengers", 12, 12), list("USAccDeaths", 12, 12), list("ldeaths", 12, 12),
  list("nottem", 12, 12), list("co2", 12, 12), list("UKgas", 4, 4),
  list("JohnsonJohnson", 4, 4), list("austres", 4, 4), list("Nile", 1, 5),
  list("LakeHuron", 1, 5), list("WWWusage", 1, 5), list("lynx", 1, 5), list("BJsales", 1, 5)
)
levels <- c(80, 95)

fmt <- function(x) format(x, digits = 15)
rows <- character(length(cases))
errs <- matrix(0, length(cases), 2)
len <- sapply(cases, function(c) nrow(read.csv(file.path("testdata", "datasets", paste0(c[[1]], ".csv")))))
for (ci in order(len)) {
  c <- cases[[ci]]
  name <- c[[1]]; m <- c[[2]]; h <- c[[3]]
  k <- if (is.null(strides[[name]])) stride else strides[[name]]
  y <- read.csv(file.path("testdata", "datasets", paste0(name, ".csv")))$value
  n <- length(y)
  hit <- c(0, 0); cnt <- 0; models <- c()
  step <- matrix(0, h, 2)
  first <- ceiling(n / 2)
  Ts <- rev(seq(n - h, first, by = -k))
  for (T in Ts) {
    key <- paste(name, T)
    if (is.null(cache[[key]])) {
      t0 <- proc.time()[3]
      fit <- auto.arima(ts(y[1:T], frequency = m))
      fc <- forecast(fit, h = h, level = levels)
      a <- y[(T + 1):(T + h)]
      ins <- sapply(1:2, function(l) paste(as.integer(a >= fc$lower[, l] & a <= fc$upper[, l]), collapse = ""))
      f <- c(name, T, as.character(fit), ins)
      cat(paste(f, collapse = ";"), "\n", sep = "", file = cachefile, append = TRUE)
      cache[[key]] <- f
      message(sprintf("%s %s T=%d %.1fs %s", format(Sys.time(), "%H:%M:%S"), name, T, proc.time()[3] - t0, f[3]))
    }
    f <- cache[[key]]
    for (l in 1:2) {
      inside <- as.integer(strsplit(f[3 + l], "")[[1]])
      hit[l] <- hit[l] + sum(inside)
      step[, l] <- step[, l] + inside
    }
    cnt <- cnt + h
    models <- c(models, f[3])
  }
  cov <- hit / cnt
  origins <- length(Ts)
  bystep <- step / origins
  errs[ci, ] <- abs(cov - levels / 100)
  rows[ci] <- sprintf("    {\"name\": \"%s\", \"period\": %d, \"horizon\": %d, \"every\": %d, \"origins\": %d, \"coverage\": {\"80\": %s, \"95\": %s}, \"by_step\": {\"80\": [%s], \"95\": [%s]}, \"model_at_last_origin\": \"%s\"}",
    name, m, h, k, origins, fmt(cov[1]), fmt(cov[2]), paste(fmt(bystep[, 1]), collapse = ", "),
    paste(fmt(bystep[, 2]), collapse = ", "), models[length(models)])
}
cat("{\n")
cat(sprintf("  \"source\": \"%s, forecast %s: auto.arima defaults, testdata/backtest/coverage_panel.R\",\n",
  R.version.string, as.character(packageVersion("forecast"))))
cat("  \"design\": \"every k-th origin T = n - h, n - h - k, ..., down to ceiling(n/2); k per series (every)\",\n")
cat(sprintf("  \"series\": [\n%s\n  ],\n", paste(rows, collapse = ",\n")))
cat(sprintf("  \"mace\": {\"80\": %s, \"95\": %s, \"both\": %s}\n}\n",
  fmt(mean(errs[, 1])), fmt(mean(errs[, 2])), fmt(mean(errs))))

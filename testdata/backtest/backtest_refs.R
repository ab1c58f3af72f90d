# Reference values for engine/backtest, computed independently in R 4.2.2
# (base R and the `datasets` package only).
#
# Rolling-origin evaluation (last N origins, horizon h) of the "mean"
# forecaster: point forecast = mean of the training data, interval =
# mean ± qt((1+level)/2, T−1) · sd · sqrt(1 + 1/T) (the textbook prediction
# interval for a new draw from a normal sample). Scores:
#   MASE  (Hyndman & Koehler 2006): |error| / in-sample seasonal-naive MAE of
#         the origin's training data, averaged over all origins and steps;
#   sMAPE: mean of 200·|y − f| / (|y| + |f|);
#   coverage: share of actuals inside [lower, upper];
#   baseline: the seasonal-naive forecast y[T+j−k·m] scored the same way.
# Run: Rscript testdata/backtest/backtest_refs.R > testdata/backtest/backtest_refs.json

cases <- list(
  list(name = "AirPassengers", y = as.numeric(AirPassengers), m = 12, h = 12, N = 10),
  list(name = "Nile", y = as.numeric(Nile), m = 1, h = 5, N = 15),
  list(name = "USAccDeaths", y = as.numeric(USAccDeaths), m = 12, h = 6, N = 8)
)
levels <- c(80, 95)

run <- function(y, m, h, N) {
  n <- length(y)
  q <- c(); s <- c(); qb <- c(); sb <- c(); cov <- matrix(0, 0, 2)
  for (T in (n - h - N + 1):(n - h)) {
    tr <- y[1:T]
    scale <- mean(abs(diff(tr, lag = m)))
    f <- rep(mean(tr), h)
    half <- sapply(levels, function(l) qt((1 + l / 100) / 2, T - 1) * sd(tr) * sqrt(1 + 1 / T))
    nb <- sapply(1:h, function(j) tr[T + j - (floor((j - 1) / m) + 1) * m])
    a <- y[(T + 1):(T + h)]
    q <- c(q, abs(a - f) / scale); s <- c(s, 200 * abs(a - f) / (abs(a) + abs(f)))
    qb <- c(qb, abs(a - nb) / scale); sb <- c(sb, 200 * abs(a - nb) / (abs(a) + abs(nb)))
    for (j in 1:h) cov <- rbind(cov, abs(a[j] - f[j]) <= half)
  }
  list(mase = mean(q), smape = mean(s), cov = colMeans(cov), bmase = mean(qb), bsmape = mean(sb))
}

fmt <- function(x) format(x, digits = 17)
cat("{\n  \"source\": \"R 4.2.2, testdata/backtest/backtest_refs.R (base R, datasets)\",\n  \"cases\": [\n")
for (i in seq_along(cases)) {
  c <- cases[[i]]
  r <- run(c$y, c$m, c$h, c$N)
  cat(sprintf("    {\"name\": \"%s\", \"period\": %d, \"horizon\": %d, \"origins\": %d, \"mase\": %s, \"smape\": %s, \"coverage\": [%s, %s], \"baseline_mase\": %s, \"baseline_smape\": %s}%s\n",
    c$name, c$m, c$h, c$N, fmt(r$mase), fmt(r$smape), fmt(r$cov[1]), fmt(r$cov[2]),
    fmt(r$bmase), fmt(r$bsmape), if (i < length(cases)) "," else ""))
}
cat("  ]\n}\n")

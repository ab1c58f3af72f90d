# Benchmark series and R timings for engine/arima (go test -bench in engine/arima).
#
# Library: R 4.2.2 `stats` (arima.sim, arima(method = "ML")). Run from the repository root:
#   Rscript testdata/r/arima_bench.R            # fit and time all four
#   Rscript testdata/r/arima_bench.R quick      # skip the period-168 fit (about 45 s)
# The series are simulated once from the models below with set.seed and written to
# testdata/r/bench_NAME.csv (header `time,value`); an existing file is kept, so R and Go
# always fit the same numbers. Timings and fits go to testdata/r/arima_bench.json.
#
#   arima212   ARIMA(2,1,2), ar (0.5, -0.3), ma (0.4, 0.2), sigma 1, n = 1000, level +50
#   arma11     ARMA(1,1) with mean 5, ar 0.7, ma 0.3, sigma 1, n = 10000
#   airline24  (0,1,1)(0,1,1)[24], ma -0.4, sma -0.6, sigma 1, n = 2000, level +100
#   airline168 (0,1,1)(0,1,1)[168], ma -0.4, sma -0.6, sigma 1, n = 2000, level +100
args <- commandArgs(trailingOnly = TRUE)
quick <- length(args) > 0 && args[1] == "quick"

airline <- function(n, s, seed) {
  set.seed(seed)
  th <- c(-0.4, rep(0, s - 2), -0.6, 0.24)
  w <- arima.sim(list(ma = th), n = n - s - 1)
  y <- diffinv(diffinv(as.numeric(w), lag = s), lag = 1)
  100 + y
}
gen <- list(
  arima212 = function() { set.seed(212); 50 + as.numeric(arima.sim(list(order = c(2,1,2), ar = c(0.5, -0.3), ma = c(0.4, 0.2)), n = 999)) },
  arma11 = function() { set.seed(11); 5 + as.numeric(arima.sim(list(ar = 0.7, ma = 0.3), n = 10000)) },
  airline24 = function() airline(2000, 24, 24),
  airline168 = function() airline(2000, 168, 168)
)
specs <- list(
  arima212 = list(order = c(2,1,2), seasonal = c(0,0,0), period = 1),
  arma11 = list(order = c(1,0,1), seasonal = c(0,0,0), period = 1),
  airline24 = list(order = c(0,1,1), seasonal = c(0,1,1), period = 24),
  airline168 = list(order = c(0,1,1), seasonal = c(0,1,1), period = 168)
)
out <- character()
for (name in names(gen)) {
  path <- file.path("testdata", "r", paste0("bench_", name, ".csv"))
  if (!file.exists(path)) {
    y <- gen[[name]]()
    write.csv(data.frame(time = seq_along(y), value = format(y, digits = 17, trim = TRUE)),
              path, row.names = FALSE, quote = FALSE)
  }
  y <- read.csv(path)$value
  if (quick && name == "airline168") next
  sp <- specs[[name]]
  gc()
  tm <- system.time(fit <- arima(y, order = sp$order,
                                 seasonal = list(order = sp$seasonal, period = sp$period), method = "ML"))
  cat(name, "elapsed", tm[["elapsed"]], "loglik", fit$loglik, "\n")
  out <- c(out, sprintf('  {"id": "%s", "n": %d, "order": [%s], "seasonal": [%s], "period": %d, "elapsed_seconds": %s, "cpu_seconds": %s, "loglik": %s, "coef": [%s]}',
                        name, length(y), paste(sp$order, collapse = ", "), paste(sp$seasonal, collapse = ", "),
                        if (sum(sp$seasonal) > 0) sp$period else 0L,
                        format(tm[["elapsed"]]), format(tm[["user.self"]] + tm[["sys.self"]]), format(fit$loglik, digits = 17),
                        paste(format(unname(fit$coef), digits = 17), collapse = ", ")))
}
con <- file(file.path("testdata", "r", if (quick) "arima_bench_quick.json" else "arima_bench.json"), "w")
cat('{"source": "', R.version.string, ' stats::arima(method = \\"ML\\"), timings by system.time",\n "fits": [\n',
    paste(out, collapse = ",\n"), '\n]}\n', sep = "", file = con)
close(con)

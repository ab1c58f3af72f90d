# Reference for cmd/forewarn/e2e TestStreamingEqualsBatch.
#
# Library: R 4.2.2 `stats` (arima(method = "ML"), predict.Arima) on the
# `datasets` series WWWusage (as exported to testdata/datasets/WWWusage.csv).
# The daemon keeps a window of the last 80 closed buckets; with the series'
# 100 values published one a bucket and one more observation to close the
# last bucket, that window is values 21..100 (1-based).
# Run from the module root: Rscript cmd/forewarn/e2e/testdata/streaming_window.R
x <- read.csv(file.path("testdata", "datasets", "WWWusage.csv"))$value
w <- x[21:100]
fit <- arima(w, order = c(1, 1, 1), method = "ML")
pr <- predict(fit, n.ahead = 10)
num <- function(v) paste0("[", paste(format(v, digits = 17), collapse = ", "), "]")
out <- paste0('{"source": "', R.version.string, ' stats::arima(WWWusage[21:100], order = c(1,1,1), method = \\"ML\\"); predict(n.ahead = 10)",\n',
  ' "window_first": 21, "window_last": 100,\n',
  ' "coef": ', num(unname(fit$coef)), ', "sigma2": ', format(fit$sigma2, digits = 17),
  ', "loglik": ', format(fit$loglik, digits = 17), ', "nobs": ', fit$nobs, ',\n',
  ' "pred": ', num(as.numeric(pr$pred)), ',\n',
  ' "se": ', num(as.numeric(pr$se)), '}\n')
cat(out, file = file.path("cmd", "forewarn", "e2e", "testdata", "streaming_window.json"))

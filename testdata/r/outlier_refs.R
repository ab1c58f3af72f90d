# Reference values for engine/outlier (Chen & Liu 1993 detection):
# R 4.2.2 stats::arima and R forecast 8.20 tsoutliers() (Debian r-base-core, r-cran-forecast).
# The R package tsoutliers (a Chen-Liu implementation) is not packaged in Debian and is not used.
# Run from the repository root:
#   Rscript testdata/r/outlier_refs.R
# Writes testdata/r/outlier_refs.json and testdata/datasets/gold.csv.
#
# forecast::tsoutliers() is a different, simpler method than Chen-Liu: residuals of a robust
# decomposition (supsmu trend for non-seasonal series) flagged outside 3 interquartile ranges;
# it is the general-purpose routine the Go test compares flagged points with.
# Indices in the JSON are 0-based.
#   pi: weights of pi(B) = phi(B)(1-B)^d / theta(B) for ARIMA(1,1,1) phi=0.5 theta=-0.3 and the
#       airline model theta=-0.4, Theta=-0.6, s=12, from ARMAtoMA(ar = -ma, ma = ar side).
#   nile_ls: stats::arima(Nile, order = c(0,0,0), xreg = cbind(LS1899 = step at 1899, AO1913 = pulse))
suppressPackageStartupMessages({library(forecast); library(jsonlite)})

export <- function(name, x) {
  path <- file.path("testdata", "datasets", paste0(name, ".csv"))
  if (file.exists(path)) return(invisible())
  df <- data.frame(time = format(as.numeric(time(x)), digits = 12, trim = TRUE),
                   value = format(as.numeric(x), digits = 15, trim = TRUE))
  df$value[is.na(x)] <- "NA"
  write.csv(df, path, row.names = FALSE, quote = FALSE)
}
export("gold", forecast::gold)

pmul <- function(a, b) { out <- rep(0, length(a) + length(b) - 1)
  for (i in seq_along(a)) out[i:(i + length(b) - 1)] <- out[i:(i + length(b) - 1)] + a[i] * b
  out }
# pi weights: numerator A(z) (1 + sum a_j z^j), denominator M(z) (1 + sum m_j z^j)
piw <- function(A, M, n) c(1, ARMAtoMA(ar = -M[-1], ma = A[-1], lag.max = n - 1))
A111 <- pmul(c(1, -0.5), c(1, -1)); M111 <- c(1, -0.3)
sma <- c(1, rep(0, 11), -0.6)
Aair <- pmul(c(1, -1), c(1, rep(0, 11), -1)); Mair <- pmul(c(1, -0.4), sma)

n <- length(Nile)
ls <- as.numeric(seq_len(n) >= 29); ao <- as.numeric(seq_len(n) == 43)
fit <- arima(Nile, order = c(0, 0, 0), xreg = cbind(LS1899 = ls, AO1913 = ao), method = "ML")

to0 <- function(ix) if (length(ix)) ix - 1L else integer(0)
out <- list(
  pi_arima111 = piw(A111, M111, 40),
  pi_airline = piw(Aair, Mair, 40),
  nile_ls = list(coef = unname(coef(fit)), names = names(coef(fit)), loglik = fit$loglik,
                 se = unname(sqrt(diag(fit$var.coef)))),
  forecast_tsoutliers = list(
    Nile = list(index = I(to0(tsoutliers(Nile)$index))),
    gold = list(index = I(to0(tsoutliers(gold)$index))),
    version = as.character(packageVersion("forecast")))
)
write_json(out, "testdata/r/outlier_refs.json", digits = NA, auto_unbox = TRUE, pretty = TRUE)

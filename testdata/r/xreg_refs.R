# Reference values for regression with ARIMA errors and Fourier terms in engine/arima:
# R 4.2.2 stats::arima(xreg = ..., method = "ML"), predict.Arima(newxreg = ...), and
# R forecast 8.20 fourier() (Debian r-base-core and r-cran-forecast).
# Run from the repository root:
#   Rscript testdata/r/xreg_refs.R
# Writes testdata/r/xreg_refs.json and exports the series it uses that are not there yet
# to testdata/datasets/NAME.csv (header `time,value`, as testdata/r/arima_refs.R does).
#
# taylor: half-hourly electricity demand in England and Wales, 5 June to 27 August 2000
# (4032 values, cycles of 48 and 336 half-hours), from R forecast 8.20 (`forecast::taylor`,
# GPL-3; source: J. W. Taylor (2003), J. Operational Research Society 54, 799-805).
#
# Holes (1-based positions set to NA, in the series and so in the likelihood):
#   nottem_na : 10, 11, 50, 120, 200
#   UKgas_na  : 20, 21, 60 (of log UKgas)
# Fourier terms: fourier(x, K) of forecast 8.20 uses times 1..n in sample and n+1..n+h for
# forecasts, i.e. phase i/period at observation i (1-based).
# "drift" means an extra first regressor column 1..n (newxreg n+1..n+h), named "drift".
# Forecast standard errors are predict.Arima's: they do NOT include the uncertainty of the
# regression coefficients.
suppressPackageStartupMessages({library(forecast); library(jsonlite)})

export <- function(name, x) {
  path <- file.path("testdata", "datasets", paste0(name, ".csv"))
  if (file.exists(path)) return(invisible())
  df <- data.frame(time = format(as.numeric(time(x)), digits = 12, trim = TRUE),
                   value = format(as.numeric(x), digits = 15, trim = TRUE))
  df$value[is.na(x)] <- "NA"
  write.csv(df, path, row.names = FALSE, quote = FALSE)
}

taylor3w <- msts(as.numeric(forecast::taylor)[1:1008], seasonal.periods = c(48, 336))
export("taylor", forecast::taylor)

cases <- list(
  list(id = "nottem_f2_ar1", data = "nottem", x = nottem, periods = 12, K = 2,
       order = c(1, 0, 0), mean = TRUE, h = 24),
  list(id = "nottem_na_f3_arma11", data = "nottem", x = nottem, holes = c(10, 11, 50, 120, 200),
       periods = 12, K = 3, order = c(1, 0, 1), mean = TRUE, h = 24),
  list(id = "nottem_f6_ar2", data = "nottem", x = nottem, periods = 12, K = 6,
       order = c(2, 0, 0), mean = TRUE, h = 24),
  list(id = "UKgas_log_f2_ima_drift", data = "UKgas", transform = "log", x = log(UKgas), periods = 4,
       K = 2, order = c(0, 1, 1), mean = FALSE, drift = TRUE, h = 8),
  list(id = "UKgas_log_na_f1_ima_drift", data = "UKgas", transform = "log", x = log(UKgas),
       holes = c(20, 21, 60), periods = 4, K = 1, order = c(0, 1, 1), mean = FALSE, drift = TRUE, h = 8),
  list(id = "taylor3w_f33_ar2", data = "taylor", first = 1008, x = taylor3w, periods = c(48, 336),
       K = c(3, 3), order = c(2, 0, 0), mean = TRUE, h = 96)
)

out <- list()
for (cs in cases) {
  x <- cs$x
  if (!is.null(cs$holes)) x[cs$holes] <- NA
  n <- length(x)
  X <- fourier(x, K = cs$K)
  Xf <- fourier(x, K = cs$K, h = cs$h)
  if (isTRUE(cs$drift)) {
    X <- cbind(drift = seq_len(n), X)
    Xf <- cbind(drift = n + seq_len(cs$h), Xf)
  }
  fit <- arima(x, order = cs$order, xreg = X, include.mean = cs$mean, method = "ML")
  pr <- predict(fit, n.ahead = cs$h, newxreg = Xf)
  # I(): keep vectors of length one as JSON arrays
  out[[length(out) + 1]] <- list(
    id = cs$id, data = cs$data, transform = if (is.null(cs$transform)) "none" else cs$transform,
    first = if (is.null(cs$first)) 0 else cs$first,
    holes = I(if (is.null(cs$holes)) integer() else cs$holes),
    periods = I(cs$periods), K = I(cs$K), order = I(cs$order), mean = cs$mean && cs$order[2] == 0,
    drift = isTRUE(cs$drift), h = cs$h,
    xreg_names = I(colnames(X)), xreg_first = I(unname(X[1, ])), xreg_last = I(unname(X[n, ])),
    newxreg_last = I(unname(Xf[cs$h, ])),
    coef_names = I(names(fit$coef)), coef = I(unname(fit$coef)),
    coef_se = I(unname(sqrt(diag(fit$var.coef)))),
    sigma2 = fit$sigma2, loglik = fit$loglik, nobs = fit$nobs, convergence = fit$code,
    forecast = I(as.numeric(pr$pred)), forecast_se = I(as.numeric(pr$se)))
}

# fourier() on the whole taylor series with K = c(10, 10): the 38 columns (harmonic 7 of
# the weekly cycle is harmonic 1 of the daily one and is left out) at a few rows, and the
# first rows of its h = 48 continuation.
tx <- forecast::taylor
F <- fourier(tx, K = c(10, 10))
Ff <- fourier(tx, K = c(10, 10), h = 48)
rows <- c(1, 2, 47, 48, 49, 336, 337, 2000, 4032)
fr <- list(periods = c(48, 336), K = c(10, 10), names = colnames(F), rows = rows,
           values = unname(F[rows, ]), future_rows = c(1, 48), future = unname(Ff[c(1, 48), ]))

doc <- list(source = paste(R.version.string, "stats::arima(xreg, method = \"ML\"), predict.Arima;",
                           "forecast", as.character(packageVersion("forecast")), "fourier()"),
            script = "testdata/r/xreg_refs.R", cases = out, fourier = fr)
writeLines(toJSON(doc, digits = NA, auto_unbox = TRUE, pretty = TRUE),
           file.path("testdata", "r", "xreg_refs.json"))
cat("wrote", length(out), "cases\n")

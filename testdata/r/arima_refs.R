# Reference values for engine/arima: R 4.2.2 stats::arima(method = "ML") and predict().
#
# Library: R 4.2.2 `stats` (arima, predict.Arima) on series from R 4.2.2 `datasets`.
# Run from the repository root:
#   Rscript testdata/r/arima_refs.R
# Writes testdata/r/arima_refs.json and exports every series it uses to
# testdata/datasets/NAME.csv (header `time,value`, time = R's time(x) as a decimal year,
# NA for a missing value; an existing file is left alone).
#
# Series with deterministic holes (documented here, reproduced exactly by the CSV):
#   ldeaths_na      = ldeaths with NA at positions 5, 18, 19, 40, 61 (1-based)
#   AirPassengers_na = AirPassengers with NA at positions 7, 30, 31, 32, 100, 139
# "transform" tells the Go test what to apply to the CSV values before fitting
# (none | log | log10); "xreg_drift" means xreg = 1:n (a drift, newxreg = n+1:n+h).
options(digits = 17)

holes <- list(ldeaths_na = list(base = "ldeaths", at = c(5, 18, 19, 40, 61)),
              AirPassengers_na = list(base = "AirPassengers", at = c(7, 30, 31, 32, 100, 139)))

getseries <- function(name) {
  if (!is.null(holes[[name]])) {
    h <- holes[[name]]
    x <- get(h$base, envir = asNamespace("datasets"))
    x[h$at] <- NA
    return(x)
  }
  get(name, envir = asNamespace("datasets"))
}

export <- function(name, x) {
  path <- file.path("testdata", "datasets", paste0(name, ".csv"))
  if (file.exists(path)) return(invisible())
  df <- data.frame(time = format(as.numeric(time(x)), digits = 12, trim = TRUE),
                   value = format(as.numeric(x), digits = 15, trim = TRUE))
  df$value[is.na(x)] <- "NA"
  write.csv(df, path, row.names = FALSE, quote = FALSE)
}

cases <- list(
  list(id = "lh_ar1", data = "lh", order = c(1,0,0)),
  list(id = "lh_ar3", data = "lh", order = c(3,0,0)),
  list(id = "lh_arma11", data = "lh", order = c(1,0,1)),
  list(id = "lh_ar1_nomean", data = "lh", order = c(1,0,0), mean = FALSE),
  list(id = "LakeHuron_ar2", data = "LakeHuron", order = c(2,0,0)),
  list(id = "USAccDeaths_airline", data = "USAccDeaths", order = c(0,1,1), seasonal = c(0,1,1)),
  list(id = "presidents_ar1", data = "presidents", order = c(1,0,0)),
  list(id = "presidents_ar3", data = "presidents", order = c(3,0,0)),
  list(id = "presidents_arma11", data = "presidents", order = c(1,0,1)),
  list(id = "AirPassengers_log_airline", data = "AirPassengers", transform = "log", order = c(0,1,1), seasonal = c(0,1,1)),
  list(id = "AirPassengers_log10_airline", data = "AirPassengers", transform = "log10", order = c(0,1,1), seasonal = c(0,1,1)),
  list(id = "Nile_ima11", data = "Nile", order = c(0,1,1)),
  list(id = "Nile_arma11", data = "Nile", order = c(1,0,1)),
  list(id = "UKgas_log_airline", data = "UKgas", transform = "log", order = c(0,1,1), seasonal = c(0,1,1)),
  list(id = "nottem_sar", data = "nottem", order = c(1,0,0), seasonal = c(2,1,0)),
  list(id = "co2_airline", data = "co2", order = c(0,1,1), seasonal = c(0,1,1)),
  list(id = "co2_111_011", data = "co2", order = c(1,1,1), seasonal = c(0,1,1)),
  list(id = "ldeaths_sarma", data = "ldeaths", order = c(1,0,0), seasonal = c(1,1,1)),
  list(id = "ldeaths_na_sarma", data = "ldeaths_na", order = c(1,0,0), seasonal = c(1,1,1)),
  list(id = "ldeaths_na_ma", data = "ldeaths_na", order = c(0,0,2), seasonal = c(0,1,1)),
  list(id = "AirPassengers_na_log_airline", data = "AirPassengers_na", transform = "log", order = c(0,1,1), seasonal = c(0,1,1)),
  list(id = "JohnsonJohnson_log_airline", data = "JohnsonJohnson", transform = "log", order = c(0,1,1), seasonal = c(0,1,1)),
  list(id = "WWWusage_111", data = "WWWusage", order = c(1,1,1)),
  list(id = "WWWusage_310", data = "WWWusage", order = c(3,1,0)),
  list(id = "lynx_log10_ar2", data = "lynx", transform = "log10", order = c(2,0,0)),
  list(id = "lynx_ar4", data = "lynx", order = c(4,0,0)),
  list(id = "sunspot.year_arma21", data = "sunspot.year", order = c(2,0,1)),
  list(id = "austres_110_drift", data = "austres", order = c(1,1,0), drift = TRUE),
  list(id = "BJsales_111", data = "BJsales", order = c(1,1,1)),
  list(id = "BJsales_022", data = "BJsales", order = c(0,2,2)),
  list(id = "Nile_na_ima11", data = "Nile", holes = c(20, 21, 50), order = c(0,1,1))
)

num <- function(v) {
  if (length(v) == 0) return("[]")
  s <- ifelse(is.finite(v), format(v, digits = 17, trim = TRUE), "null")
  paste0("[", paste(s, collapse = ", "), "]")
}
str <- function(v) paste0("[", paste0('"', v, '"', collapse = ", "), "]")

out <- character()
exported <- character()
for (cs in cases) {
  x <- getseries(cs$data)
  if (!(cs$data %in% exported)) { export(cs$data, x); exported <- c(exported, cs$data) }
  if (!is.null(cs$holes)) x[cs$holes] <- NA
  tr <- if (is.null(cs$transform)) "none" else cs$transform
  if (tr == "log") x <- log(x)
  if (tr == "log10") x <- log10(x)
  seasonal <- if (is.null(cs$seasonal)) c(0,0,0) else cs$seasonal
  period <- if (is.null(cs$seasonal)) 0 else frequency(x)
  inc <- if (is.null(cs$mean)) TRUE else cs$mean
  h <- if (period > 0) 2 * period else 10
  n <- length(x)
  if (isTRUE(cs$drift)) {
    fit <- arima(x, order = cs$order, seasonal = list(order = seasonal, period = frequency(x)),
                 xreg = seq_len(n), include.mean = inc, method = "ML")
    pr <- predict(fit, n.ahead = h, newxreg = n + seq_len(h))
  } else {
    fit <- arima(x, order = cs$order, seasonal = list(order = seasonal, period = frequency(x)),
                 include.mean = inc, method = "ML")
    pr <- predict(fit, n.ahead = h)
  }
  se <- sqrt(diag(fit$var.coef))
  out <- c(out, paste0(
    '  {"id": "', cs$id, '", "data": "', cs$data, '", "transform": "', tr, '",\n',
    '   "holes": ', num(if (is.null(cs$holes)) numeric() else cs$holes), ',\n',
    '   "order": ', num(cs$order), ', "seasonal": ', num(seasonal), ', "period": ', period,
    ', "mean": ', tolower(as.character(inc && sum(cs$order[2], seasonal[2]) == 0)),
    ', "drift": ', tolower(as.character(isTRUE(cs$drift))), ',\n',
    '   "coef_names": ', str(names(fit$coef)), ',\n',
    '   "coef": ', num(unname(fit$coef)), ',\n',
    '   "coef_se": ', num(unname(se)), ',\n',
    '   "sigma2": ', format(fit$sigma2, digits = 17), ', "loglik": ', format(fit$loglik, digits = 17),
    ', "aic": ', format(fit$aic, digits = 17), ', "nobs": ', fit$nobs, ', "convergence": ', fit$code, ',\n',
    '   "forecast": ', num(as.numeric(pr$pred)), ',\n',
    '   "forecast_se": ', num(as.numeric(pr$se)), '}'))
}
con <- file(file.path("testdata", "r", "arima_refs.json"), "w")
cat('{"source": "', R.version.string, ' stats::arima(method = \\"ML\\"), predict.Arima; datasets package",\n',
    ' "script": "testdata/r/arima_refs.R",\n "cases": [\n', sep = "", file = con)
cat(paste(out, collapse = ",\n"), file = con)
cat("\n]}\n", file = con)
close(con)
cat("wrote", length(out), "cases\n")

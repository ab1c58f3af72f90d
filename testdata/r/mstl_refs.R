# Reference decomposition for engine/auto's MSTL: R forecast 8.20 (Debian r-cran-forecast) on R 4.2.2.
# Run from the repository root:
#   Rscript testdata/r/mstl_refs.R
# Writes testdata/r/mstl_refs.json: mstl(msts(taylor[1:3984], c(48, 336))) with its defaults
# (iterate = 2, s.window = 7 + 4 * (1:2) = 11, 15, stats::stl with robust = FALSE, no lambda):
# the two seasonal components and the trend.
# MSTL: Bandara, Hyndman & Bergmeir (2021), arXiv:2107.13462; STL: Cleveland, Cleveland,
# McRae & Terpenning (1990), Journal of Official Statistics 6(1), 3-73.
suppressPackageStartupMessages({library(forecast); library(jsonlite)})
x <- as.numeric(taylor)[1:3984]
d <- mstl(msts(x, seasonal.periods = c(48, 336)))
out <- list(r = R.version.string, forecast = as.character(packageVersion("forecast")),
            n = length(x), periods = c(48, 336),
            seasonal48 = as.numeric(d[, "Seasonal48"]), seasonal336 = as.numeric(d[, "Seasonal336"]),
            trend = as.numeric(d[, "Trend"]))
write_json(out, "testdata/r/mstl_refs.json", digits = NA, auto_unbox = TRUE)

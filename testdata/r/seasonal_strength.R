# Seasonal-strength reference values for forewarn/engine/stationarity.SeasonalStrength.
# Library: R 4.2.2 `stats::decompose` (classical additive decomposition, centred moving-average
# trend) and `datasets`. F_S = max(0, 1 - var(R)/var(S + R)) over the periods where the
# remainder R is defined (Wang, Smith & Hyndman 2006 define the strength from a decomposition).
# Writes testdata/r/seasonal_strength.json. Run from the repository root:
#   Rscript testdata/r/seasonal_strength.R
num <- function(v) formatC(v, digits = 17, format = "g")
cases <- list(
  list(name = "log(AirPassengers)", x = log(AirPassengers)),
  list(name = "AirPassengers", x = AirPassengers),
  list(name = "USAccDeaths", x = USAccDeaths),
  list(name = "austres", x = austres)
)
out <- c("{", sprintf(' "library": "%s stats::decompose",', R.version.string), ' "cases": [')
for (i in seq_along(cases)) {
  k <- cases[[i]]
  d <- decompose(k$x, type = "additive")
  ok <- !is.na(d$random)
  fs <- max(0, 1 - var(d$random[ok]) / var(d$seasonal[ok] + d$random[ok]))
  out <- c(out, sprintf('  {"name": "%s", "period": %d, "strength": %s, "figure": [%s]}%s',
                        k$name, frequency(k$x), num(fs), paste(num(d$figure), collapse = ", "),
                        if (i < length(cases)) "," else ""))
}
out <- c(out, " ]", "}")
writeLines(out, file.path("testdata", "r", "seasonal_strength.json"))

# Exports the R `datasets` series used by the stationarity and transform tests to
# testdata/datasets/NAME.csv (header `time,value`; time = R's time(x) as a decimal year;
# NA for a missing value). A file that already exists is left alone (another script may own it).
# Library: R 4.2.2 `datasets`. Run from the repository root:
#   Rscript testdata/r/stationarity_datasets.R
series <- c("Nile", "LakeHuron", "lynx", "AirPassengers", "austres", "WWWusage", "presidents", "USAccDeaths")
for (name in series) {
  path <- file.path("testdata", "datasets", paste0(name, ".csv"))
  if (file.exists(path)) {
    cat("kept", path, "\n")
    next
  }
  x <- get(name, envir = asNamespace("datasets"))
  df <- data.frame(time = format(as.numeric(time(x)), digits = 12, trim = TRUE),
                   value = format(as.numeric(x), digits = 15, trim = TRUE))
  df$value[is.na(x)] <- "NA"
  write.csv(df, path, row.names = FALSE, quote = FALSE)
  cat("wrote", path, "\n")
}

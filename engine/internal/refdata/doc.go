// Package refdata is test support only: it reads the reference files
// committed under the module's testdata/ directory for the tests of the
// engine packages. It is the one package below engine that does I/O, and
// only test files may import it; no engine code depends on it.
//
// What it reads:
//
//   - testdata/datasets/NAME.csv: series of R 4.2.2's `datasets` package
//     exported by the R scripts under testdata/r/ (arima_refs.R,
//     stationarity_datasets.R), and any other file of the same form, such
//     as testdata/r/bench_*.csv (arima_bench.R). The form is a header row
//     "time,value" and one row per observation; the value NA is a missing
//     observation (NaN). Series returns the value column in file order.
//   - JSON reference values (testdata/r/*.json, testdata/py/*.json,
//     testdata/backtest/*.json), decoded into the caller's value.
//
// The module root is the nearest directory at or above the working
// directory (a test's package directory) that holds go.mod, so paths do
// not depend on how deep the calling package sits.
//
// Every function takes the test's testing.TB and ends the test with
// tb.Fatal when a file is missing or malformed, naming the file and, for a
// CSV, the line; none returns an error. The functions are safe for
// concurrent use by parallel tests; each call returns fresh slices the
// caller may modify.
package refdata

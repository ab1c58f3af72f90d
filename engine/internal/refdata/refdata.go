package refdata

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"testing"
)

// moduleRoot finds the directory of go.mod once per test binary.
var moduleRoot = sync.OnceValues(func() (string, error) {
	dir, err := os.Getwd()
	if err != nil {
		return "", fmt.Errorf("refdata: module root: %w", err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir, nil
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			return "", ErrNoModule
		}
		dir = parent
	}
})

// Path is the path of rel (slash-separated, relative to the module's
// testdata/ directory), e.g. Path(tb, "r/arima_refs.json").
func Path(tb testing.TB, rel string) string {
	tb.Helper()
	root, err := moduleRoot()
	if err != nil {
		tb.Fatal(err)
	}
	return filepath.Join(root, "testdata", filepath.FromSlash(rel))
}

// Dataset is the series of testdata/datasets/NAME.csv (R 4.2.2
// `datasets`), NA as NaN.
func Dataset(tb testing.TB, name string) []float64 {
	tb.Helper()
	return Series(tb, "datasets/"+name+".csv")
}

// Series is the value column of the "time,value" CSV file rel under
// testdata/, NA as NaN.
func Series(tb testing.TB, rel string) []float64 {
	tb.Helper()
	path := Path(tb, rel)
	f, err := os.Open(path)
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	y, err := parseSeries(f)
	if err != nil {
		tb.Fatalf("%s: %v", path, err)
	}
	return y
}

// JSON decodes the file rel under testdata/ into v (a pointer, as for
// json.Unmarshal).
func JSON(tb testing.TB, rel string, v any) {
	tb.Helper()
	path := Path(tb, rel)
	b, err := os.ReadFile(path)
	if err != nil {
		tb.Fatal(err)
	}
	if err := json.Unmarshal(b, v); err != nil {
		tb.Fatalf("%s: %v", path, err)
	}
}

// parseSeries reads a "time,value" CSV: the header, then one observation a
// row, the value a number or NA (NaN).
func parseSeries(r io.Reader) ([]float64, error) {
	rows, err := csv.NewReader(r).ReadAll()
	if err != nil {
		return nil, fmt.Errorf("refdata: %w", err)
	}
	if len(rows) == 0 || len(rows[0]) != 2 || rows[0][0] != "time" || rows[0][1] != "value" {
		return nil, ErrHeader
	}
	y := make([]float64, 0, len(rows)-1)
	for i, row := range rows[1:] {
		// csv.Reader has already checked that every row has two cells.
		if row[1] == "NA" {
			y = append(y, math.NaN())
			continue
		}
		v, err := strconv.ParseFloat(row[1], 64)
		if err != nil {
			return nil, fmt.Errorf("%w: line %d: %q", ErrValue, i+2, row[1])
		}
		y = append(y, v)
	}
	return y, nil
}

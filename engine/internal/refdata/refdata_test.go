package refdata

import (
	"errors"
	"math"
	"strings"
	"testing"
)

func TestParseSeries(t *testing.T) {
	y, err := parseSeries(strings.NewReader("time,value\n1,2.5\n2,NA\n3,-1e3\n"))
	if err != nil {
		t.Fatal(err)
	}
	if len(y) != 3 || y[0] != 2.5 || !math.IsNaN(y[1]) || y[2] != -1000 {
		t.Errorf("parseSeries = %v, want [2.5 NaN -1000]", y)
	}
	for _, tc := range []struct {
		in   string
		want error
	}{
		{"", ErrHeader},
		{"t,value\n1,2\n", ErrHeader},
		{"time,value,extra\n1,2,3\n", ErrHeader},
		{"time,value\n1,2\n2,x\n", ErrValue},
		{"time,value\n1,\n", ErrValue},
	} {
		if _, err := parseSeries(strings.NewReader(tc.in)); !errors.Is(err, tc.want) {
			t.Errorf("parseSeries(%q): %v, want %v", tc.in, err, tc.want)
		}
	}
	// A row with a missing cell is the CSV reader's field-count error.
	if _, err := parseSeries(strings.NewReader("time,value\n1\n")); err == nil {
		t.Error("parseSeries with a one-cell row: no error")
	}
}

// TestDataset reads committed series whose lengths R documents: ?Nile
// ("a time series of length 100"), ?AirPassengers (monthly, 1949–1960: 144),
// and the holes testdata/r/arima_refs.R puts into AirPassengers_na
// (positions 7, 30, 31, 32, 100, 139, 1-based).
func TestDataset(t *testing.T) {
	if n := len(Dataset(t, "Nile")); n != 100 {
		t.Errorf("Nile: %d values, want 100 (R 4.2.2 ?Nile)", n)
	}
	ap, na := Dataset(t, "AirPassengers"), Dataset(t, "AirPassengers_na")
	if len(ap) != 144 || len(na) != 144 {
		t.Fatalf("AirPassengers: %d and %d values, want 144 (R 4.2.2 ?AirPassengers)", len(ap), len(na))
	}
	holes := map[int]bool{7: true, 30: true, 31: true, 32: true, 100: true, 139: true}
	for i := range ap {
		switch {
		case holes[i+1] && !math.IsNaN(na[i]):
			t.Errorf("AirPassengers_na[%d] = %v, want NaN", i+1, na[i])
		case !holes[i+1] && na[i] != ap[i]:
			t.Errorf("AirPassengers_na[%d] = %v, want %v", i+1, na[i], ap[i])
		}
		if math.IsNaN(ap[i]) {
			t.Errorf("AirPassengers[%d] is missing", i+1)
		}
	}
}

func TestJSON(t *testing.T) {
	var doc struct {
		Cases []struct {
			ID string `json:"id"`
		} `json:"cases"`
	}
	JSON(t, "r/arima_refs.json", &doc)
	if len(doc.Cases) == 0 || doc.Cases[0].ID == "" {
		t.Errorf("r/arima_refs.json: %d cases, first %+v", len(doc.Cases), doc.Cases)
	}
}

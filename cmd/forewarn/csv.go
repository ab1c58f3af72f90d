package main

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
)

// readSeriesCSV reads one series from a CSV file with a header row
// (CONTRACT.md §3). The value column is the one named column, or the last
// column when column is empty; times are the cells of the first column when
// the file has more than one column and the values are not in it, else nil
// (the file has no time column). An empty cell, NA or NaN is a missing value (NaN). Every error
// names the file and, where there is one, the line.
func readSeriesCSV(path, column string) (times []string, values []float64, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	return parseSeriesCSV(f, path, column)
}

func parseSeriesCSV(r io.Reader, path, column string) (times []string, values []float64, err error) {
	cr := csv.NewReader(r)
	cr.TrimLeadingSpace = true
	cr.ReuseRecord = false
	header, vcol, err := readHeader(cr, path, column)
	if err != nil {
		return nil, nil, err
	}
	tcol := -1
	if len(header) > 1 && vcol != 0 {
		tcol = 0
	}
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, nil, csvError(path, err)
		}
		line, _ := cr.FieldPos(0)
		cell := strings.TrimSpace(rec[vcol])
		var v float64
		switch cell {
		case "", "NA", "NaN", "nan", "NAN":
			v = math.NaN()
		default:
			v, err = strconv.ParseFloat(cell, 64)
			if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
				return nil, nil, fmt.Errorf("%s:%d: column %q: %q is not a finite number (use an empty cell, NA or NaN for a missing value)",
					path, line, header[vcol], cell)
			}
		}
		values = append(values, v)
		if tcol >= 0 {
			times = append(times, strings.TrimSpace(rec[tcol]))
		}
	}
	if len(values) == 0 {
		return nil, nil, fmt.Errorf("%s: no observations after the header row", path)
	}
	return times, values, nil
}

// readHeader reads a CSV's header row (a leading byte-order mark
// dropped) and finds the value column: the first one named column, or the
// last column when column is "".
func readHeader(cr *csv.Reader, path, column string) (header []string, vcol int, err error) {
	header, err = cr.Read()
	if errors.Is(err, io.EOF) {
		return nil, 0, fmt.Errorf("%s: empty file: want a header row and one row per observation", path)
	}
	if err != nil {
		return nil, 0, csvError(path, err)
	}
	if len(header) > 0 {
		header[0] = strings.TrimPrefix(header[0], "\ufeff")
	}
	vcol = len(header) - 1
	if column != "" {
		vcol = -1
		for i, h := range header {
			if strings.TrimSpace(h) == column {
				vcol = i
				break
			}
		}
		if vcol < 0 {
			return nil, 0, fmt.Errorf("%s:1: no column named %q (columns: %s)", path, column, strings.Join(header, ", "))
		}
	}
	return header, vcol, nil
}

func csvError(path string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return fmt.Errorf("%s:%d: %v", path, pe.Line, pe.Err)
	}
	return fmt.Errorf("%s: %v", path, err)
}

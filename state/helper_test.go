package state

import (
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"

	bolt "go.etcd.io/bbolt"

	"forewarn/engine/series"
)

// openTest opens a store under t.TempDir() and, on cleanup, runs bbolt's
// consistency check (Tx.Check) before closing it (STYLE §13).
func openTest(t testing.TB, opts ...Option) *Store {
	t.Helper()
	return openTestIn(t, t.TempDir(), opts...)
}

func openTestIn(t testing.TB, dir string, opts ...Option) *Store {
	t.Helper()
	s, err := Open(dir, opts...)
	if err != nil {
		t.Fatalf("Open(%s): %v", dir, err)
	}
	t.Cleanup(func() {
		err := s.db.View(func(tx *bolt.Tx) error {
			for err := range tx.Check() {
				t.Errorf("bbolt check of %s: %v", s.path, err)
			}
			return nil
		})
		if err != nil && !strings.Contains(err.Error(), "database not open") {
			t.Errorf("check view: %v", err)
		}
		if err := s.Close(); err != nil {
			t.Errorf("Close: %v", err)
		}
	})
	return s
}

// randomFloat returns a float64 that is usually ordinary, sometimes NaN
// with a random payload, an infinity, a signed zero or a subnormal.
func randomFloat(r *rand.Rand) float64 {
	switch r.IntN(12) {
	case 0:
		return math.Float64frombits(0x7ff0000000000001 | r.Uint64()&0x800fffffffffffff) // NaN, random sign and payload
	case 1:
		return math.Inf(1 - 2*r.IntN(2))
	case 2:
		return math.Copysign(0, -1)
	case 3:
		return math.Float64frombits(r.Uint64() & 0x000fffffffffffff) // subnormal
	}
	return r.NormFloat64() * math.Pow(10, float64(r.IntN(20)-10))
}

func randomFloats(r *rand.Rand, n int) []float64 {
	if n == 0 {
		if r.IntN(2) == 0 {
			return nil
		}
		return []float64{}
	}
	v := make([]float64, n)
	for i := range v {
		v[i] = randomFloat(r)
	}
	return v
}

func randomString(r *rand.Rand, max int) string {
	const chars = "abcdefghijklmnopqrstuvwxyz0123456789._-é∑"
	rs := []rune(chars)
	var b strings.Builder
	for range r.IntN(max + 1) {
		b.WriteRune(rs[r.IntN(len(rs))])
	}
	return b.String()
}

// randomSnapshot fills every field of a snapshot; the window has up to
// maxWindow values, the model is present three times in four.
func randomSnapshot(r *rand.Rand, maxWindow int) *series.Snapshot {
	s := &series.Snapshot{
		Topic:          "t." + randomString(r, 30),
		Fingerprint:    randomString(r, 64),
		Seq:            r.Uint64(),
		SeqApplied:     r.Uint32(),
		Kind:           []string{"gauge", "counter"}[r.IntN(2)],
		StepSeconds:    r.Int64N(86400) + 1,
		HasOpen:        r.IntN(2) == 0,
		OpenBucket:     r.Int64() - math.MaxInt64/2,
		OpenValue:      randomFloat(r),
		CounterOffset:  randomFloat(r),
		CounterLastRaw: randomFloat(r),
		CounterHasRaw:  r.IntN(2) == 0,
		CounterResets:  r.Uint64(),
		WindowEnd:      -r.Int64(),
		Window:         randomFloats(r, r.IntN(maxWindow+1)),
		Closed:         r.Uint64(),
		SinceRefit:     r.IntN(1 << 20),
		Late:           r.Uint64(),
		Transform: series.TransformSnapshot{
			Name:    []string{"none", "log", "boxcox", "scaled-exp"}[r.IntN(4)],
			Lambda:  randomFloat(r),
			Loc:     randomFloat(r),
			Scale:   randomFloat(r),
			RunN:    r.Int64(),
			RunMean: randomFloat(r),
			RunM2:   randomFloat(r),
		},
		RefitFailures: r.Uint64(),
		LastRefitNote: randomString(r, 80),
	}
	if r.IntN(4) != 0 {
		s.Model = &series.ModelSnapshot{
			Order:    [3]int{r.IntN(4), r.IntN(3), r.IntN(4)},
			Seasonal: [3]int{r.IntN(2), 1, 1},
			Period:   24,
			Mean:     r.IntN(2) == 0,
			Drift:    r.IntN(2) == 0,
			Params:   randomFloats(r, r.IntN(8)),
			Sigma2:   randomFloat(r),
			LogLik:   randomFloat(r),
			AICc:     randomFloat(r),
			NObs:     r.IntN(100000) - 5,
			FittedAt: r.Int64(),
			Filter:   randomFloats(r, r.IntN(80)),
		}
	}
	for range r.IntN(4) {
		s.Alerts = append(s.Alerts, series.AlertSnapshot{
			Rule:        randomString(r, 20),
			Raised:      r.IntN(2) == 0,
			Since:       r.Int64(),
			Probability: randomFloat(r),
		})
	}
	if r.IntN(2) == 0 {
		s.Calibration = randomFloats(r, r.IntN(200))
	}
	// format 4
	if r.IntN(2) == 0 {
		s.Guard = randomFloats(r, r.IntN(12))
	}
	s.Flag = series.GuardFlag{Bucket: r.Int64() - math.MaxInt64/2, Verdict: uint8(r.IntN(3)), Z: randomFloat(r)}
	s.Flags = r.Uint64()
	if m := s.Model; m != nil {
		m.NX = r.IntN(60)
		for range r.IntN(3) {
			m.Design = append(m.Design, series.ColumnSet{Kind: uint8(1 + r.IntN(3)), Values: randomFloats(r, r.IntN(20))})
		}
		for range r.IntN(3) {
			m.Cycles = append(m.Cycles, series.CycleChoice{Seconds: randomFloat(r), Terms: []string{"arima", "fourier", "none"}[r.IntN(3)], K: r.IntN(11)})
		}
		for range r.IntN(4) {
			m.Outliers = append(m.Outliers, series.OutlierFound{Kind: uint8(r.IntN(3)), Bucket: r.Int64(), Size: randomFloat(r), Tau: randomFloat(r)})
		}
		m.SearchedTo = r.Int64()
	}
	return s
}

// diff reports the first difference between a and b, comparing float64
// values by their bits and treating nil and empty slices alike; "" means
// equal.
func diff(a, b any) string { return diffValue("", reflect.ValueOf(a), reflect.ValueOf(b)) }

func diffValue(path string, a, b reflect.Value) string {
	switch a.Kind() {
	case reflect.Pointer:
		if a.IsNil() || b.IsNil() {
			if a.IsNil() != b.IsNil() {
				return fmt.Sprintf("%s: nil %t vs %t", path, a.IsNil(), b.IsNil())
			}
			return ""
		}
		return diffValue(path, a.Elem(), b.Elem())
	case reflect.Struct:
		for i := range a.NumField() {
			if d := diffValue(path+"."+a.Type().Field(i).Name, a.Field(i), b.Field(i)); d != "" {
				return d
			}
		}
		return ""
	case reflect.Slice:
		if a.Len() != b.Len() {
			return fmt.Sprintf("%s: length %d vs %d", path, a.Len(), b.Len())
		}
		for i := range a.Len() {
			if d := diffValue(fmt.Sprintf("%s[%d]", path, i), a.Index(i), b.Index(i)); d != "" {
				return d
			}
		}
		return ""
	case reflect.Float64:
		if x, y := math.Float64bits(a.Float()), math.Float64bits(b.Float()); x != y {
			return fmt.Sprintf("%s: bits %016x vs %016x", path, x, y)
		}
		return ""
	}
	if !a.Equal(b) {
		return fmt.Sprintf("%s: %v vs %v", path, a, b)
	}
	return ""
}

package stream

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// Reference: the Go standard library's strconv.AppendFloat with 'g' and
// precision 12, which rounds the exact binary value correctly with ties to
// even. The fast path must write the same bytes.

func checkG12(t *testing.T, v float64) {
	t.Helper()
	got := string(appendG12(nil, v))
	want := strconv.FormatFloat(v, 'g', pointDigits, 64)
	if got != want {
		t.Fatalf("appendG12(%v = %b) = %q, strconv 'g' 12 gives %q", v, v, got, want)
	}
}

func TestAppendG12MatchesStrconv(t *testing.T) {
	// Edges by hand: zero, signs, the range ends of the fast path, the
	// switch to exponent form (exponent −5 and 12), carries into the next
	// power of ten, and exact ties (x.5 at the thirteenth digit) on both
	// parities, which strconv rounds to even.
	for _, v := range []float64{
		0, math.Copysign(0, -1), 1, -1, 0.5, 1834, 1e-11, 1e33, math.Nextafter(1e33, 0),
		math.Nextafter(1e-11, 0), 1e-12, 5e-324, math.MaxFloat64, -math.MaxFloat64,
		0.0001, 0.00001, 0.000099999999999995, 999999999999, 999999999999.5,
		999999999999.4, 9999999999995, 1e12, 1.5e12, 123456789012.5, 123456789013.5,
		100000000000.5, 100000000001.5, 0.1, 0.2, 0.30000000000000004, 1043.2,
		123456789012345, 1234567.891234567, -1234567.891234567, 2.5e-5, 1e21, 1e22,
		1e23, 9.999999999999999e22,
	} {
		checkG12(t, v)
	}
	// Values at and next to every power of ten in and around the fast
	// path's range, where the exponent estimate is decided.
	for k := -13; k <= 35; k++ {
		p := math.Pow(10, float64(k))
		x := p
		for range 3 {
			x = math.Nextafter(x, 0)
		}
		for range 7 {
			checkG12(t, x)
			checkG12(t, -x)
			x = math.Nextafter(x, math.Inf(1))
		}
	}
	rng := rand.New(rand.NewPCG(7, 11))
	// Log-uniform magnitudes over the whole fast-path range and beyond.
	for range 400_000 {
		v := math.Pow(10, rng.Float64()*50-14)
		if rng.IntN(2) == 0 {
			v = -v
		}
		checkG12(t, v)
	}
	// Typical forecast values: levels with random fractions.
	for range 200_000 {
		checkG12(t, 1000+rng.NormFloat64()*300)
	}
	// Near-ties: integers and halves at the twelfth and thirteenth digit,
	// scaled by powers of ten, and their neighbours.
	for range 200_000 {
		m := float64(1e11 + rng.Int64N(9e11))
		v := (m + 0.5) * math.Pow(10, float64(rng.IntN(30)-20))
		checkG12(t, v)
		checkG12(t, math.Nextafter(v, 0))
		checkG12(t, math.Nextafter(v, math.Inf(1)))
	}
	// Random bit patterns (finite ones).
	for range 200_000 {
		v := math.Float64frombits(rng.Uint64())
		if math.IsNaN(v) || math.IsInf(v, 0) {
			continue
		}
		checkG12(t, v)
	}
}

func FuzzAppendG12(f *testing.F) {
	for _, v := range []float64{0, 1834, 999999999999.5, 1e-11, 1e33, 0.1, 5e-324} {
		f.Add(math.Float64bits(v))
	}
	f.Fuzz(func(t *testing.T, bits uint64) {
		v := math.Float64frombits(bits)
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return
		}
		checkG12(t, v)
	})
}

func BenchmarkAppendG12(b *testing.B) {
	vals := benchValues()
	buf := make([]byte, 0, 64)
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		buf = appendG12(buf[:0], vals[i&1023])
	}
}

// BenchmarkStrconvG12 and BenchmarkStrconvShortest are the baselines of
// BenchmarkAppendG12, on the same values.
func BenchmarkStrconvG12(b *testing.B) {
	vals := benchValues()
	buf := make([]byte, 0, 64)
	for i := 0; b.Loop(); i++ {
		buf = strconv.AppendFloat(buf[:0], vals[i&1023], 'g', pointDigits, 64)
	}
}

func BenchmarkStrconvShortest(b *testing.B) {
	vals := benchValues()
	buf := make([]byte, 0, 64)
	for i := 0; b.Loop(); i++ {
		buf = strconv.AppendFloat(buf[:0], vals[i&1023], 'g', -1, 64)
	}
}

func benchValues() []float64 {
	rng := rand.New(rand.NewPCG(1, 2))
	vals := make([]float64, 1024)
	for i := range vals {
		vals[i] = 1000 + rng.NormFloat64()*50
	}
	return vals
}

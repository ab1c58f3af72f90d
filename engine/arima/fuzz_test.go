package arima

import (
	"encoding/binary"
	"errors"
	"math"
	"testing"
)

// Hostile inputs return errors and never panic (issue 2, fuzzing).
func TestFitRejectsBadInput(t *testing.T) {
	ar1 := Spec{P: 1, Mean: true}
	ima := Spec{D: 1, Q: 1}
	constant := make([]float64, 50)
	for i := range constant {
		constant[i] = 7
	}
	trend := make([]float64, 50)
	for i := range trend {
		trend[i] = float64(i)
	}
	withInf := append([]float64(nil), trend...)
	withInf[10] = math.Inf(1)
	huge := append([]float64(nil), trend...)
	huge[3] = 1e300
	allNaN := []float64{math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()}
	for _, c := range []struct {
		name string
		y    []float64
		spec Spec
		want error
	}{
		{"constant", constant, ar1, ErrConstant},
		{"constant differenced", trend, Spec{D: 2}, ErrConstant},
		{"inf", withInf, ar1, ErrData},
		{"1e300", huge, ar1, ErrData},
		{"short", []float64{1, 2, 3}, ar1, ErrTooShort},
		{"empty", nil, ima, ErrTooShort},
		{"all missing", allNaN, ar1, ErrTooShort},
		{"bad spec", trend, Spec{P: -1}, ErrSpec},
	} {
		_, err := Fit(c.y, c.spec, nil)
		if !errors.Is(err, c.want) {
			t.Errorf("%s: error %v, want %v", c.name, err, c.want)
		}
	}
}

// FuzzParseSpec: the model syntax of configuration and command line
// ("p,d,q" or "p,d,q x P,D,Q", a period, a constant) never panics, and a
// Spec that NewSpec accepts round-trips through Orders and ConstantName;
// its Label is never empty. ParseLegacySpec never panics either.
func FuzzParseSpec(f *testing.F) {
	for _, s := range []string{"1,0,0", "0,1,1 x 0,1,1", "2,1,2", "1,0,1", "0,1,1×0,1,1", " 1 , 1 , 1 x 0 , 0 , 0 ",
		"1,1,1 x", "x", "99999999999999999999,0,0", "", "ARIMA(0,1,1)(0,1,1)[12] with drift"} {
		f.Add(s, 12, uint8(0))
	}
	f.Fuzz(func(t *testing.T, s string, period int, c uint8) {
		ParseLegacySpec(s)
		ord, sord, seasonal, err := ParseOrders(s)
		if err != nil {
			return
		}
		if !seasonal {
			period = 0
		}
		sp, err := NewSpec(ord, sord, period, Constant(c%5))
		if err != nil {
			return
		}
		o2, s2, seas2, err := ParseOrders(sp.Orders())
		if err != nil {
			t.Fatalf("%q -> %+v -> Orders %q: %v", s, sp, sp.Orders(), err)
		}
		if seas2 && !seasonal || !seas2 && sp.Period != 0 {
			t.Fatalf("%q -> %+v -> Orders %q: seasonal %v", s, sp, sp.Orders(), seas2)
		}
		c2, err := ParseConstant(sp.ConstantName())
		if err != nil {
			t.Fatalf("ConstantName %q: %v", sp.ConstantName(), err)
		}
		back, err := NewSpec(o2, s2, sp.Period, c2)
		if err != nil || back != sp {
			t.Fatalf("%q -> %+v -> %q %q -> %+v, %v", s, sp, sp.Orders(), sp.ConstantName(), back, err)
		}
		if sp.Label() == "" || sp.String() != sp.Label() {
			t.Fatalf("label %q string %q", sp.Label(), sp.String())
		}
	})
}

// decodeSeries reads float64 values (little endian) from b.
func decodeSeries(b []byte) []float64 {
	y := make([]float64, len(b)/8)
	for i := range y {
		y[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return y
}

func encodeSeries(y []float64) []byte {
	b := make([]byte, 8*len(y))
	for i, v := range y {
		binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(v))
	}
	return b
}

// FuzzFit: Fit, LogLik and the filter never panic on arbitrary series and
// small orders; a successful fit has finite numbers.
func FuzzFit(f *testing.F) {
	base := []float64{2.4, 2.4, 2.4, 2.2, 2.1, 1.5, 2.3, 2.3, 2.5, 2.0, 1.9, 1.7, 2.2, 1.8, 3.2, 3.2, 2.7, 2.2}
	seeds := [][]float64{
		base,
		{5, 5, 5, 5, 5, 5, 5, 5, 5, 5},
		{1, math.NaN(), 3, math.Inf(1), 2, 1, 0, 4},
		{1e300, 1, 2, 3, 4, 5, 6, 7, 8, 9},
		{1},
		{},
		{math.NaN(), math.NaN(), math.NaN(), math.NaN()},
		{1e-300, -1e-300, 1e-300, -1e-300, 1e-300, 2e-300, 0, 1e-300},
		{1e99, -1e99, 1e99, 1e99, -1e99, 0, 1e99, -1e99, 1e99, 0, 1, 2},
	}
	for i, s := range seeds {
		f.Add(encodeSeries(s), uint8(i%3), uint8(i%2), uint8((i+1)%3), uint8(i%2), uint8(4))
	}
	f.Fuzz(func(t *testing.T, data []byte, p, d, q, seas, period uint8) {
		y := decodeSeries(data)
		if len(y) > 400 {
			y = y[:400]
		}
		spec := Spec{P: int(p % 3), D: int(d % 3), Q: int(q % 3)}
		if seas%2 == 1 {
			spec.Period = 2 + int(period%6)
			spec.SD = int(seas/2) % 2
			spec.SQ = 1
		}
		spec.Mean = spec.D+spec.SD == 0
		res, err := Fit(y, spec, &FitOptions{MaxIter: 30})
		if err != nil {
			return
		}
		if math.IsNaN(res.LogLik) || math.IsInf(res.LogLik, 0) || !(res.Model.Sigma2 > 0) {
			t.Fatalf("fit %s returned non-finite numbers: %+v", spec, res)
		}
		if _, _, _, err := LogLik(y, res.Model); err != nil {
			t.Fatalf("loglik at the fitted model: %v", err)
		}
		flt, err := NewFilter(res.Model, 5)
		if err != nil {
			return
		}
		flt.Steps(y)
		flt.Step(math.Inf(1))
		flt.Step(1e300)
		m, v := make([]float64, 5), make([]float64, 5)
		flt.Forecast(m, v)
	})
}

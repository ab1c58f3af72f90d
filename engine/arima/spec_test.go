package arima

import (
	"errors"
	"testing"
)

func TestParseSpecRoundTrip(t *testing.T) {
	for _, s := range []string{
		"ARIMA(1,0,0)", "ARIMA(0,1,1)(0,1,1)[12]", "ARIMA(2,1,2) with drift", "ARIMA(1,0,1) with zero mean",
		"ARIMA(0,1,1)(0,1,1)[168]", "ARIMA(1,0,0)(1,0,0)[4]", "ARIMA(0,0,0)(0,1,0)[7] with drift",
	} {
		sp, err := ParseSpec(s)
		if err != nil {
			t.Fatalf("%s: %v", s, err)
		}
		if got := sp.String(); got != s {
			t.Errorf("String(ParseSpec(%q)) = %q", s, got)
		}
	}
	sp, _ := ParseSpec(" ARIMA( 1 , 0 , 2 ) ")
	if sp != (Spec{P: 1, Q: 2, Mean: true}) {
		t.Errorf("spaces: %+v", sp)
	}
}

func TestSpecErrorsNameThePart(t *testing.T) {
	for _, c := range []struct{ in, field string }{
		{"ARMA(1,0,0)", "syntax"},
		{"ARIMA(1,0)", "syntax"},
		{"ARIMA(-1,0,0)", "p"},
		{"ARIMA(1,3,0)", "d"},
		{"ARIMA(1,0,x)", "syntax"},
		{"ARIMA(0,1,1)(0,1,1)", "syntax"},
		{"ARIMA(0,1,1)(0,2,1)[12]", "D"},
		{"ARIMA(0,1,1)(0,1,1)[1]", "period"},
		{"ARIMA(0,1,1)(9,0,0)[12]", "P"},
		{"ARIMA(0,1,1)(0,0,0)[5000]", "period"},
		{"ARIMA(0,2,1) with drift", "drift"},
		{"ARIMA(0,1,1) with zero mean", "mean"},
	} {
		_, err := ParseSpec(c.in)
		var se *SpecError
		if !errors.As(err, &se) || !errors.Is(err, ErrSpec) {
			t.Errorf("%s: error %v, want a *SpecError", c.in, err)
			continue
		}
		if se.Field != c.field {
			t.Errorf("%s: field %q, want %q (%v)", c.in, se.Field, c.field, err)
		}
	}
	if err := (Spec{D: 1, Mean: true}).Validate(); !errors.Is(err, ErrSpec) {
		t.Errorf("mean with d=1 accepted: %v", err)
	}
}

func TestNumParamsAndNewModel(t *testing.T) {
	s := Spec{P: 2, Q: 1, SP: 1, SQ: 1, Period: 12, Mean: true}
	if s.NumParams() != 6 {
		t.Errorf("NumParams = %d", s.NumParams())
	}
	p := []float64{0.1, 0.2, 0.3, 0.4, 0.5, 9}
	m, err := NewModel(s, p, 2)
	if err != nil {
		t.Fatal(err)
	}
	got := m.Params()
	for i := range p {
		if got[i] != p[i] {
			t.Fatalf("Params() = %v, want %v", got, p)
		}
	}
	if m.AR[1] != 0.2 || m.MA[0] != 0.3 || m.SAR[0] != 0.4 || m.SMA[0] != 0.5 || m.Mean != 9 {
		t.Errorf("layout: %+v", m)
	}
	if _, err := NewModel(s, p[:5], 2); !errors.Is(err, ErrParams) {
		t.Errorf("short params: %v", err)
	}
	if _, err := NewModel(s, p, 0); !errors.Is(err, ErrParams) {
		t.Errorf("zero sigma2: %v", err)
	}
}

// ψ-weights of the integrated process. ARIMA(0,1,1) with θ: ψ_0 = 1,
// ψ_j = 1 + θ for j ≥ 1 (Box & Jenkins 1976, §5.2, the IMA(1,1) model).
func TestPsiWeightsIMA(t *testing.T) {
	m, _ := NewModel(Spec{D: 1, Q: 1}, []float64{-0.4}, 1)
	psi := PsiWeights(m, 5)
	want := []float64{1, 0.6, 0.6, 0.6, 0.6}
	for i := range want {
		if d := psi[i] - want[i]; d > 1e-15 || d < -1e-15 {
			t.Fatalf("psi = %v, want %v", psi, want)
		}
	}
}

// Reflecting non-invertible MA roots keeps the autocorrelation: MA(1) with
// θ and 1/θ have the same ρ(1) = θ/(1+θ²) (Brockwell & Davis 1991, §3.1).
func TestMAInvert(t *testing.T) {
	got := maInvert([]float64{2.5})
	if d := got[0] - 0.4; d > 1e-15 || d < -1e-15 {
		t.Errorf("maInvert(2.5) = %v", got)
	}
	got = maInvert([]float64{-2.5, 1}) // roots of 1 − 2.5z + z² are 0.5 and 2
	roots, _ := polyRoots(append([]float64{1}, got...))
	for _, r := range roots {
		if cmplxAbs(r) < 1 {
			t.Errorf("maInvert left a root inside the unit circle: %v (coefficients %v)", r, got)
		}
	}
}

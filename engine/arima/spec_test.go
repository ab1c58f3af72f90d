package arima

import (
	"errors"
	"testing"
)

// The label is forewarn's own rendering, pinned in the project's shared
// decisions for CONTRACT revision 2: these four lines are its examples.
func TestLabel(t *testing.T) {
	for _, c := range []struct {
		ord, sord [3]int
		period    int
		c         Constant
		want      string
	}{
		{[3]int{1, 1, 1}, [3]int{}, 0, ConstantAuto, "ARIMA 1,1,1"},
		{[3]int{0, 1, 1}, [3]int{0, 1, 1}, 12, ConstantAuto, "ARIMA 0,1,1 × 0,1,1 s=12"},
		{[3]int{2, 0, 0}, [3]int{}, 0, ConstantAuto, "ARIMA 2,0,0 + mean"},
		{[3]int{1, 1, 0}, [3]int{0, 1, 0}, 24, ConstantNone, "ARIMA 1,1,0 × 0,1,0 s=24"},
		{[3]int{1, 1, 0}, [3]int{0, 0, 0}, 24, ConstantDrift, "ARIMA 1,1,0 × 0,0,0 s=24 + drift"},
		{[3]int{2, 0, 0}, [3]int{}, 0, ConstantNone, "ARIMA 2,0,0"},
	} {
		s, err := NewSpec(c.ord, c.sord, c.period, c.c)
		if err != nil {
			t.Fatalf("%v %v %d %v: %v", c.ord, c.sord, c.period, c.c, err)
		}
		if got := s.Label(); got != c.want {
			t.Errorf("Label() = %q, want %q", got, c.want)
		}
		if s.String() != s.Label() {
			t.Errorf("String() = %q, Label() = %q", s.String(), s.Label())
		}
	}
}

// Orders round-trips through ParseOrders, and ParseOrders takes x or ×
// and white space anywhere between tokens (the syntax of CONTRACT
// revision 2, §2 and §3).
func TestParseOrders(t *testing.T) {
	for _, c := range []struct {
		in        string
		ord, sord [3]int
		seasonal  bool
		canonical string
	}{
		{"1,1,1", [3]int{1, 1, 1}, [3]int{}, false, "1,1,1"},
		{"0,1,1 x 0,1,1", [3]int{0, 1, 1}, [3]int{0, 1, 1}, true, "0,1,1 x 0,1,1"},
		{" 2 , 0 ,0x1,0,0 ", [3]int{2, 0, 0}, [3]int{1, 0, 0}, true, "2,0,0 x 1,0,0"},
		{"0,1,1 × 0,1,1", [3]int{0, 1, 1}, [3]int{0, 1, 1}, true, "0,1,1 x 0,1,1"},
		{"0,1,1×0,1,1", [3]int{0, 1, 1}, [3]int{0, 1, 1}, true, "0,1,1 x 0,1,1"},
		{"3,0,0", [3]int{3, 0, 0}, [3]int{}, false, "3,0,0"},
	} {
		ord, sord, seasonal, err := ParseOrders(c.in)
		if err != nil || ord != c.ord || sord != c.sord || seasonal != c.seasonal {
			t.Errorf("ParseOrders(%q) = %v %v %v %v", c.in, ord, sord, seasonal, err)
			continue
		}
		period := 0
		if seasonal {
			period = 12
		}
		s, err := NewSpec(ord, sord, period, ConstantNone)
		if err != nil {
			t.Fatalf("%q: %v", c.in, err)
		}
		if got := s.Orders(); got != c.canonical {
			t.Errorf("Orders() of %q = %q, want %q", c.in, got, c.canonical)
		}
		o2, s2, seas2, err := ParseOrders(s.Orders())
		if err != nil || o2 != ord || s2 != sord || seas2 != seasonal {
			t.Errorf("ParseOrders(Orders()) of %q: %v %v %v %v", c.in, o2, s2, seas2, err)
		}
	}
	for _, bad := range []string{"", "1,1", "1,1,1,1", "1,-1,0", "a,b,c", "1,1,1 x", "1,1,1 x 0,1", "1,1,1 x 0,1,1 x 0,0,1",
		"ARIMA(1,1,1)", "1.5,0,0", "9999999,0,0", "1;1;1"} {
		if _, _, _, err := ParseOrders(bad); !errors.Is(err, ErrSpec) {
			t.Errorf("ParseOrders(%q): error %v, want ErrSpec", bad, err)
		}
	}
}

// ConstantAuto is a mean when d+D = 0 and nothing otherwise; a mean needs
// d+D = 0, a drift d+D = 1 (Box & Jenkins 1976, §6.1: a constant in a
// model differenced d+D ≥ 2 times would be a polynomial trend of that
// degree; forewarn allows the mean and the linear drift only).
func TestNewSpecConstant(t *testing.T) {
	for _, c := range []struct {
		ord, sord   [3]int
		period      int
		c           Constant
		mean, drift bool
		field       string // "" when valid
	}{
		{[3]int{1, 0, 0}, [3]int{}, 0, ConstantAuto, true, false, ""},
		{[3]int{1, 1, 0}, [3]int{}, 0, ConstantAuto, false, false, ""},
		{[3]int{1, 0, 0}, [3]int{}, 0, ConstantNone, false, false, ""},
		{[3]int{1, 0, 0}, [3]int{}, 0, ConstantMean, true, false, ""},
		{[3]int{1, 1, 0}, [3]int{}, 0, ConstantDrift, false, true, ""},
		{[3]int{0, 0, 1}, [3]int{0, 1, 1}, 12, ConstantDrift, false, true, ""},
		{[3]int{1, 1, 0}, [3]int{}, 0, ConstantMean, false, false, "mean"},
		{[3]int{0, 2, 1}, [3]int{}, 0, ConstantDrift, false, false, "drift"},
		{[3]int{0, 0, 1}, [3]int{}, 0, ConstantDrift, false, false, "drift"},
		{[3]int{0, 1, 1}, [3]int{0, 1, 1}, 0, ConstantNone, false, false, "period"},
		{[3]int{0, 1, 1}, [3]int{0, 1, 1}, 1, ConstantNone, false, false, "period"},
		{[3]int{0, 1, 1}, [3]int{0, 2, 1}, 12, ConstantNone, false, false, "D"},
		{[3]int{0, 1, 1}, [3]int{9, 0, 0}, 12, ConstantNone, false, false, "P"},
		{[3]int{0, 1, 1}, [3]int{0, 0, 0}, 5000, ConstantNone, false, false, "period"},
		{[3]int{1, 3, 0}, [3]int{}, 0, ConstantNone, false, false, "d"},
		{[3]int{21, 0, 0}, [3]int{}, 0, ConstantNone, false, false, "p"},
		{[3]int{1, 0, 0}, [3]int{}, 0, Constant(9), false, false, "constant"},
	} {
		s, err := NewSpec(c.ord, c.sord, c.period, c.c)
		if c.field == "" {
			if err != nil || s.Mean != c.mean || s.Drift != c.drift {
				t.Errorf("NewSpec(%v, %v, %d, %v) = %+v, %v", c.ord, c.sord, c.period, c.c, s, err)
			}
			if got, _ := ParseConstant(s.ConstantName()); got == ConstantAuto {
				t.Errorf("ConstantName() = %q is not a definite constant", s.ConstantName())
			}
			continue
		}
		var se *SpecError
		if !errors.As(err, &se) || !errors.Is(err, ErrSpec) || se.Field != c.field {
			t.Errorf("NewSpec(%v, %v, %d, %v): error %v, want a *SpecError on %q", c.ord, c.sord, c.period, c.c, err, c.field)
		}
	}
	for _, n := range []string{"auto", "none", "mean", "drift"} {
		c, err := ParseConstant(n)
		if err != nil || c.String() != n {
			t.Errorf("ParseConstant(%q) = %v, %v", n, c, err)
		}
	}
	if c, err := ParseConstant(""); err != nil || c != ConstantAuto {
		t.Errorf(`ParseConstant("") = %v, %v`, c, err)
	}
	if _, err := ParseConstant("yes"); !errors.Is(err, ErrSpec) {
		t.Errorf(`ParseConstant("yes"): %v`, err)
	}
}

// ParseLegacySpec reads the spelling of format-1 state records: what
// the format-1 encoder wrote for each model shape, and the constant its
// suffix (or the lack of one) meant.
func TestParseLegacySpec(t *testing.T) {
	for _, c := range []struct {
		in   string
		want Spec
	}{
		{"ARIMA(1,0,0)", Spec{P: 1, Mean: true}},
		{"ARIMA(0,1,1)(0,1,1)[12]", Spec{D: 1, Q: 1, SD: 1, SQ: 1, Period: 12}},
		{"ARIMA(2,1,2) with drift", Spec{P: 2, D: 1, Q: 2, Drift: true}},
		{"ARIMA(1,0,1) with zero mean", Spec{P: 1, Q: 1}},
		{"ARIMA(0,0,0)(0,1,0)[7] with drift", Spec{SD: 1, Period: 7, Drift: true}},
		{" ARIMA( 1 , 0 , 2 ) ", Spec{P: 1, Q: 2, Mean: true}},
	} {
		got, err := ParseLegacySpec(c.in)
		if err != nil || got != c.want {
			t.Errorf("ParseLegacySpec(%q) = %+v, %v; want %+v", c.in, got, err, c.want)
		}
	}
	for _, c := range []struct{ in, field string }{
		{"ARMA(1,0,0)", "syntax"},
		{"1,0,0", "syntax"},
		{"ARIMA(1,0)", "syntax"},
		{"ARIMA(-1,0,0)", "p"},
		{"ARIMA(1,0,x)", "syntax"},
		{"ARIMA(0,1,1)(0,1,1)", "syntax"},
		{"ARIMA(0,1,1)(0,1,1)[1]", "period"},
		{"ARIMA(0,2,1) with drift", "drift"},
		{"ARIMA(0,1,1) with zero mean", "mean"},
	} {
		_, err := ParseLegacySpec(c.in)
		var se *SpecError
		if !errors.As(err, &se) || !errors.Is(err, ErrSpec) || se.Field != c.field {
			t.Errorf("ParseLegacySpec(%q): error %v, want a *SpecError on %q", c.in, err, c.field)
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

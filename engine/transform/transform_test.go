package transform

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"

	"forewarn/engine/internal/refdata"
)

// The series are those of R 4.2.2 `datasets`, exported to
// testdata/datasets/NAME.csv by testdata/r/stationarity_datasets.R (NA becomes
// NaN) and read with refdata.Dataset.

func TestParseString(t *testing.T) {
	for _, s := range []string{"none", "log", "boxcox", "boxcox(0.3)", "boxcox(-1)", "boxcox(0)", "boxcox(0.1234567890123)", "scaled-exp"} {
		tr, err := Parse(s)
		if err != nil {
			t.Fatalf("Parse(%q): %v", s, err)
		}
		if got := tr.String(); got != s {
			t.Errorf("Parse(%q).String() = %q", s, got)
		}
		back, err := Parse(tr.String())
		if err != nil || back.String() != tr.String() || !(back.Lambda == tr.Lambda || math.IsNaN(tr.Lambda) && math.IsNaN(back.Lambda)) {
			t.Errorf("round trip of %q: %+v, %v", s, back, err)
		}
	}
	if tr, err := Parse(" BoxCox( 0.5 ) "); err != nil || tr.Lambda != 0.5 {
		t.Errorf("Parse with spaces and capitals: %+v, %v", tr, err)
	}
	for _, s := range []string{"", "auto", "sqrt", "boxcox(", "boxcox()", "boxcox(x)", "boxcox(NaN)", "boxcox(inf)", "log()"} {
		if _, err := Parse(s); err == nil {
			t.Errorf("Parse(%q): no error", s)
		}
	}
}

func TestForwardDomain(t *testing.T) {
	cases := []struct {
		tr   Transform
		x    float64
		want error
	}{
		{Transform{Name: Log}, 0, ErrDomain},
		{Transform{Name: Log}, -3, ErrDomain},
		{Transform{Name: BoxCox, Lambda: 0.5}, -1, ErrDomain},
		{Transform{Name: BoxCox, Lambda: math.NaN()}, 2, ErrNoLambda},
		{Transform{Name: None}, math.Inf(1), ErrDomain},
		{Transform{Name: ScaledExp, Scale: 1}, 710, ErrOverflow},
		{Transform{Name: "sqrt"}, 1, ErrUnknown},
	}
	for _, c := range cases {
		if _, err := c.tr.Forward(c.x); !errors.Is(err, c.want) {
			t.Errorf("%v.Forward(%v) = %v, want %v", c.tr, c.x, err, c.want)
		}
	}
	// Scaling first keeps exp finite (common practice: exp overflows above ≈ 709.78).
	if w, err := (Transform{Name: ScaledExp, Loc: 700, Scale: 10}).Forward(710); err != nil || w != math.E {
		t.Errorf("scaled-exp(710; 700, 10) = %v, %v; want e", w, err)
	}
	dst := []float64{0, 0, 0}
	err := Transform{Name: Log}.ForwardSlice(dst, []float64{1, math.NaN(), -2})
	if !errors.Is(err, ErrDomain) || !math.IsNaN(dst[1]) {
		t.Errorf("ForwardSlice: %v, %v", dst, err)
	}
}

// transformsUnderTest is one transform of each kind, with z-scaling on some of them.
func transformsUnderTest() []Transform {
	return []Transform{
		{Name: None, Loc: 1000, Scale: 50},
		{Name: Log},
		{Name: Log, Scale: math.Ln10}, // log10
		{Name: BoxCox, Lambda: 0.3, Loc: 10, Scale: 2},
		{Name: BoxCox, Lambda: -0.7},
		{Name: BoxCox, Lambda: 1.5},
		{Name: ScaledExp, Loc: 500, Scale: 100},
	}
}

// Property: Inverse(Forward(x)) = x within 1e-9 relative, on seeded random positive series
// (levels from 1e-3 to 1e6). For the transforms with a location the error is relative to
// max(|x|, |Loc|), the size of the numbers the subtraction works with.
func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, tr := range transformsUnderTest() {
		for range 200 {
			level := math.Pow(10, rng.Float64()*9-3)
			n := 1 + rng.IntN(200)
			x := make([]float64, n)
			for i := range x {
				x[i] = level * math.Exp(0.5*rng.NormFloat64())
			}
			if tr.Name == ScaledExp {
				tr = Freeze(tr, x)
			}
			w := make([]float64, n)
			if err := tr.ForwardSlice(w, x); err != nil {
				t.Fatalf("%v: %v", tr, err)
			}
			for i, v := range x {
				back, ok := tr.Inverse(w[i])
				ref := math.Max(math.Abs(v), math.Abs(tr.Loc))
				if !ok || math.Abs(back-v) > 1e-9*ref {
					t.Fatalf("%v (Loc %v Scale %v): x %v -> w %v -> %v, %v", tr, tr.Loc, tr.Scale, v, w[i], back, ok)
				}
			}
		}
	}
}

func TestInverseDomain(t *testing.T) {
	cases := []struct {
		tr Transform
		w  float64
	}{
		{Transform{Name: ScaledExp, Scale: 1}, 0},
		{Transform{Name: ScaledExp, Scale: 1}, -1},
		{Transform{Name: BoxCox, Lambda: 0.5}, -2}, // λw + 1 = 0
		{Transform{Name: BoxCox, Lambda: -0.5}, 3}, // λw + 1 < 0: beyond +∞
		{Transform{Name: Log}, 800},                // exp overflows
		{Transform{Name: None}, math.NaN()},
		{Transform{Name: None}, math.Inf(-1)},
	}
	for _, c := range cases {
		if x, ok := c.tr.Inverse(c.w); ok {
			t.Errorf("%v.Inverse(%v) = %v, ok; want not ok", c.tr, c.w, x)
		}
		if _, ok := c.tr.Mean(c.w, 0.01); ok {
			t.Errorf("%v.Mean(%v) ok; want not ok", c.tr, c.w)
		}
	}
}

// InverseSlice must be Inverse applied to each value (a property of the
// code, no outside source): every transform, values in and out of the
// domains, NaN and infinities.
func TestInverseSliceIsInverse(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 9))
	w := []float64{0, -1, 1, 800, -800, 3, -2, math.NaN(), math.Inf(1), math.Inf(-1)}
	for range 200 {
		w = append(w, r.NormFloat64()*3)
	}
	for _, tr := range []Transform{
		{Name: None, Loc: 5, Scale: 2}, {Name: Log, Loc: 1, Scale: 0.5}, {Name: BoxCox, Lambda: 0.5, Scale: 1},
		{Name: BoxCox, Lambda: -0.5, Loc: 0.2, Scale: 1.5}, {Name: BoxCox, Lambda: 0, Scale: 1},
		{Name: ScaledExp, Loc: 3, Scale: 4}, {Name: "unknown"},
	} {
		x := make([]float64, len(w))
		ok := make([]bool, len(w))
		tr.InverseSlice(x, ok, w)
		for i, v := range w {
			wx, wok := tr.Inverse(v)
			if ok[i] != wok || (wok && x[i] != wx) || (!wok && !math.IsNaN(x[i])) {
				t.Fatalf("%v: InverseSlice at %v = %v, %v; Inverse = %v, %v", tr, v, x[i], ok[i], wx, wok)
			}
		}
	}
}

// Coverage in raw units. Source: the exact Gaussian h-step forecast of an AR(1) (Box &
// Jenkins 1976, §5.2: mean μ + φ^h (w_n − μ), variance σ²(1 − φ^{2h})/(1 − φ²)) or of a
// random walk with drift (mean w_n + hδ, variance hσ²), simulated on the model scale with
// known parameters; the bands are inverted through the transform and checked against the
// inverted simulated value. 10 000 seeded paths per transform: the binomial standard error of
// an 80 % coverage is 0.4 points, so ±2 points is a 5-sigma tolerance.
func TestCoverageRawUnits(t *testing.T) {
	type model struct {
		phi, mu, sigma, drift float64
		randomWalk            bool
		start                 float64
	}
	cases := []struct {
		tr Transform
		m  model
	}{
		{Transform{Name: None, Loc: 1000, Scale: 50}, model{phi: 0.7, sigma: 1}},
		{Transform{Name: Log}, model{phi: 0.9, mu: 5, sigma: 0.1}},
		{Transform{Name: BoxCox, Lambda: 0.3, Loc: 10, Scale: 2}, model{randomWalk: true, drift: 0.02, sigma: 0.1, start: 0}},
		{Transform{Name: ScaledExp, Loc: 500, Scale: 100}, model{phi: 0.8, mu: 20, sigma: 1}},
	}
	const paths, burn, hmax = 10000, 50, 24
	horizons := []int{1, 6, 24}
	levels := []float64{0.80, 0.95}
	rng := rand.New(rand.NewPCG(7, 11))
	for _, c := range cases {
		covered := make(map[[2]int]int)
		for range paths {
			m := c.m
			w := m.start
			if !m.randomWalk {
				w = m.mu + m.sigma/math.Sqrt(1-m.phi*m.phi)*rng.NormFloat64()
			}
			step := func(w float64) float64 {
				if m.randomWalk {
					return w + m.drift + m.sigma*rng.NormFloat64()
				}
				return m.mu + m.phi*(w-m.mu) + m.sigma*rng.NormFloat64()
			}
			for range burn {
				w = step(w)
			}
			origin := w
			future := w
			for h := 1; h <= hmax; h++ {
				future = step(future)
				hi := -1
				for i, hh := range horizons {
					if hh == h {
						hi = i
					}
				}
				if hi < 0 {
					continue
				}
				var mean, v float64
				if m.randomWalk {
					mean, v = origin+float64(h)*m.drift, float64(h)*m.sigma*m.sigma
				} else {
					ph := math.Pow(m.phi, float64(h))
					mean = m.mu + ph*(origin-m.mu)
					v = m.sigma * m.sigma * (1 - ph*ph) / (1 - m.phi*m.phi)
				}
				x, ok := c.tr.Inverse(future)
				if !ok {
					t.Fatalf("%v: simulated value %v has no raw image; choose other parameters", c.tr, future)
				}
				for li, level := range levels {
					z := distuv.UnitNormal.Quantile(0.5 + level/2)
					lo, okLo := c.tr.Inverse(mean - z*math.Sqrt(v))
					up, okUp := c.tr.Inverse(mean + z*math.Sqrt(v))
					if (!okLo || x >= lo) && (!okUp || x <= up) {
						covered[[2]int{hi, li}]++
					}
				}
			}
		}
		for hi, h := range horizons {
			for li, level := range levels {
				got := float64(covered[[2]int{hi, li}]) / paths
				if math.Abs(got-level) > 0.02 {
					t.Errorf("%v h=%d: coverage %.4f, nominal %.2f", c.tr, h, got, level)
				}
			}
		}
	}
}

// The log back-transformed mean against the exact log-normal mean exp(m + v/2) (Aitchison &
// Brown 1957, The Lognormal Distribution, eq. 2.8) and a seeded Monte Carlo mean. The
// second-order expansion exp(m)(1 + v/2) differs from the exact mean by ≈ exp(m)·v²/8.
func TestMeanLog(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	tr := Transform{Name: Log}
	for _, c := range []struct{ m, v float64 }{{5, 0.0001}, {5, 0.01}, {-2, 0.04}, {10, 0.1}} {
		got, ok := tr.Mean(c.m, c.v)
		if !ok {
			t.Fatalf("Mean(%v, %v) not ok", c.m, c.v)
		}
		exact := math.Exp(c.m + c.v/2)
		if tol := 1.1 * math.Exp(c.m) * c.v * c.v / 8; math.Abs(got-exact) > tol+1e-12*exact {
			t.Errorf("Mean(%v, %v) = %v, exact log-normal mean %v (tol %v)", c.m, c.v, got, exact, tol)
		}
		mc, se := monteCarloMean(rng, tr, c.m, c.v, 400000)
		if math.Abs(got-mc) > 4*se+math.Exp(c.m)*c.v*c.v/8 {
			t.Errorf("Mean(%v, %v) = %v, Monte Carlo %v ± %v", c.m, c.v, got, mc, se)
		}
	}
}

// The Box–Cox back-transformed mean against the exact mean of the back-transformed normal.
// With u = Loc + Scale·w ~ N(μ, σ²), σ² = Scale²·v, b = λμ + 1 and f(u) = (λu + 1)^{1/λ}, the
// derivatives are f⁽ᵏ⁾(μ) = f(μ)·c_k/bᵏ with c_k = Π_{j<k} (1 − jλ), and the normal central
// moments are E(U − μ)^{2n} = σ^{2n}·(2n − 1)!! (odd ones 0), so the Taylor series of E f(U) is
//
//	E f(U) = f(μ)·Σ_{n≥0} c_{2n}·xⁿ/n!,  x = σ²/(2b²)
//
// (Johnson, Kotz & Balakrishnan 1994, Continuous Univariate Distributions 1, §13.3, for the
// moments). It ends at n = 1 when 1/λ is a positive integer (λ = ½: E = (μ/2 + 1)² + σ²/4) and
// is f(μ)·exp(x) = exp(μ + σ²/2) at λ = 0, the log-normal mean (Aitchison & Brown 1957, eq. 2.8).
// Mean keeps n ≤ 1, the second-order bias adjustment (Guerrero 1993; Hyndman & Athanasopoulos,
// Forecasting: Principles and Practice, 3rd ed., §5.6, bias adjustment), so it may differ from E
// by about the n = 2 term; the tolerance is twice that term, and each case checks that it is far
// below the n = 1 term (the adjustment itself, the distance from the median f(μ)).
//
// The reference E is computed twice, independently of Mean: 2000-node Gauss–Legendre (gonum
// integrate/quad) of f(u)·φ(u) over μ ± 14σ (normal mass outside 2e-44; the window must lie in
// λu + 1 > 0), and the series above to n = 9 (closed forms at λ = ½ and 0); the two must agree
// to 1e-10 relative plus the last term taken.
func TestMeanBoxCox(t *testing.T) {
	for _, c := range []struct {
		tr   Transform
		m, v float64
	}{
		{Transform{Name: BoxCox, Lambda: 0.5}, 10, 0.5},
		{Transform{Name: BoxCox, Lambda: 0.5}, 3, 0.01},
		{Transform{Name: BoxCox, Lambda: 0.5}, 40, 4},
		{Transform{Name: BoxCox, Lambda: 0.3}, 8, 0.05},
		{Transform{Name: BoxCox, Lambda: -0.5}, 1.5, 0.001},
		{Transform{Name: BoxCox, Lambda: 1.5, Loc: 5, Scale: 3}, 2, 0.02},
		{Transform{Name: BoxCox, Lambda: 0}, 4, 0.01},
		{Transform{Name: BoxCox, Lambda: 0.25}, 6, 0.3},
	} {
		lam, s := c.tr.Lambda, c.tr.scale()
		mu, sd := c.tr.Loc+s*c.m, s*math.Sqrt(c.v)
		b := lam*mu + 1
		f := func(u float64) float64 {
			if lam == 0 {
				return math.Exp(u)
			}
			return math.Pow(lam*u+1, 1/lam)
		}
		med := f(mu)
		// Series terms f(μ)·c_{2n}·xⁿ/n!, n = 0…9.
		x := sd * sd / (2 * b * b)
		var term [10]float64
		ck, xn, fact := 1.0, 1.0, 1.0
		for n := range term {
			term[n] = med * ck * xn / fact
			ck *= (1 - float64(2*n)*lam) * (1 - float64(2*n+1)*lam)
			xn *= x
			fact *= float64(n + 1)
		}
		series := 0.0
		for _, v := range term {
			series += v
		}
		switch lam {
		case 0.5:
			series = (mu/2+1)*(mu/2+1) + sd*sd/4
		case 0:
			series = math.Exp(mu + sd*sd/2)
		}
		lo, hi := mu-14*sd, mu+14*sd
		if lam != 0 && !(lam*lo+1 > 0 && lam*hi+1 > 0) {
			t.Fatalf("%v at (%v, %v): μ ± 14σ leaves the domain λu + 1 > 0; not a case with a mean", c.tr, c.m, c.v)
		}
		dens := distuv.Normal{Mu: mu, Sigma: sd}
		quadMean := quad.Fixed(func(u float64) float64 { return f(u) * dens.Prob(u) }, lo, hi, 2000, quad.Legendre{}, 0)
		if math.Abs(quadMean-series) > 1e-10*series+math.Abs(term[len(term)-1]) {
			t.Fatalf("%v at (%v, %v): references disagree: quadrature %.15g, series %.15g", c.tr, c.m, c.v, quadMean, series)
		}

		tol := 2*math.Abs(term[2]) + 1e-10*series
		if adj := math.Abs(term[1]); tol > adj/10 {
			t.Fatalf("%v at (%v, %v): tolerance %.3g not far below the bias adjustment %.3g: the case cannot tell the mean from the median", c.tr, c.m, c.v, tol, adj)
		}
		got, ok := c.tr.Mean(c.m, c.v)
		t.Logf("%v at (%v, %v): Mean %.12g, exact %.12g (series %.12g), median %.12g, tolerance %.2g, adjustment %.2g", c.tr, c.m, c.v, got, quadMean, series, med, tol, term[1])
		if !ok || math.Abs(got-quadMean) > tol {
			t.Errorf("%v.Mean(%v, %v) = %.12g, %v; exact mean %.12g (median %.12g, tolerance %.3g)", c.tr, c.m, c.v, got, ok, quadMean, med, tol)
		}
	}
}

// The scaled-exp mean by 40-node Gauss–Hermite quadrature against a high-order reference:
// 2000-node Gauss–Legendre (gonum integrate/quad) of Loc + Scale·log(w) against the N(m, v)
// density over m ± 14σ (a window of total normal mass 1 − 2e-44), to 1e-8 of Scale; and
// against a seeded Monte Carlo mean.
func TestMeanScaledExp(t *testing.T) {
	tr := Transform{Name: ScaledExp, Loc: 500, Scale: 100}
	rng := rand.New(rand.NewPCG(8, 9))
	for _, c := range []struct{ m, v float64 }{{20, 1}, {20, 0.01}, {3, 0.04}, {1, 0.005}, {15, 1}} {
		got, ok := tr.Mean(c.m, c.v)
		if !ok {
			t.Fatalf("Mean(%v, %v) not ok", c.m, c.v)
		}
		sd := math.Sqrt(c.v)
		dens := distuv.Normal{Mu: c.m, Sigma: sd}
		ref := quad.Fixed(func(w float64) float64 {
			return (tr.Loc + tr.Scale*math.Log(w)) * dens.Prob(w)
		}, c.m-14*sd, c.m+14*sd, 2000, quad.Legendre{}, 0)
		if math.Abs(got-ref) > 1e-8*tr.Scale {
			t.Errorf("Mean(%v, %v) = %.12g, Gauss–Legendre reference %.12g", c.m, c.v, got, ref)
		}
		mc, se := monteCarloMean(rng, tr, c.m, c.v, 200000)
		if math.Abs(got-mc) > 4*se {
			t.Errorf("Mean(%v, %v) = %v, Monte Carlo %v ± %v", c.m, c.v, got, mc, se)
		}
	}
	// Too close to w = 0: log W is undefined on a visible part of the distribution.
	if _, ok := tr.Mean(2, 1); ok {
		t.Errorf("Mean(2, 1) ok; want not ok (P(W ≤ 0) = 0.023)")
	}
}

// monteCarloMean is the sample mean of Inverse(W), W ~ N(m, v), and its standard error.
func monteCarloMean(rng *rand.Rand, tr Transform, m, v float64, n int) (mean, se float64) {
	x := make([]float64, 0, n)
	for range n {
		if y, ok := tr.Inverse(m + math.Sqrt(v)*rng.NormFloat64()); ok {
			x = append(x, y)
		}
	}
	mean, sd := stat.MeanStdDev(x, nil)
	return mean, sd / math.Sqrt(float64(len(x)))
}

// The log and log10 airline fits: R 4.2.2 `arima(log(AirPassengers), c(0,1,1), seasonal =
// c(0,1,1))` has loglik 244.70, the same on log10 has 353.96, n = 131 observations after
// d + sD = 13 (REFERENCES.md). log10 x = log x / ln 10 is Transform{Log, Scale: ln 10}; on the
// raw scale the two fits are the same model, so loglik + LogJacobian agree, and the Jacobians
// differ by exactly n·log(ln 10) ≈ 109.26.
func TestLogJacobianLog10Airline(t *testing.T) {
	x := refdata.Dataset(t, "AirPassengers")[13:] // the 131 observations in the likelihood
	if len(x) != 131 {
		t.Fatalf("len = %d", len(x))
	}
	ln := Transform{Name: Log}
	log10 := Transform{Name: Log, Scale: math.Ln10}
	for _, v := range x {
		if w, _ := log10.Forward(v); math.Abs(w-math.Log10(v)) > 1e-15*math.Abs(w)+1e-16 {
			t.Fatalf("log with Scale ln 10 of %v = %v, log10 %v", v, w, math.Log10(v))
		}
	}
	jLn, j10 := ln.LogJacobian(x), log10.LogJacobian(x)
	if d, want := jLn-j10, 131*math.Log(math.Ln10); math.Abs(d-want) > 1e-9 {
		t.Errorf("Jacobian difference %v, want n·log(ln 10) = %v", d, want)
	}
	// R's logliks are rounded to 0.01: the raw-scale logliks agree to 0.01.
	if rawLn, raw10 := 244.70+jLn, 353.96+j10; math.Abs(rawLn-raw10) > 0.01 {
		t.Errorf("raw-scale loglik: log fit %v, log10 fit %v", rawLn, raw10)
	}
	// Box–Cox at λ = 0 is the log: same Jacobian.
	if j := (Transform{Name: BoxCox, Lambda: 0}).LogJacobian(x); math.Abs(j-jLn) > 1e-9 {
		t.Errorf("boxcox(0) Jacobian %v, log %v", j, jLn)
	}
}

// LogJacobian against a central finite difference of Forward, Σ log|dw/dx|, per transform
// (missing values skipped).
func TestLogJacobianFiniteDifference(t *testing.T) {
	x := []float64{3, math.NaN(), 7.5, 12, 40}
	for _, tr := range transformsUnderTest() {
		var want float64
		for _, v := range x {
			if math.IsNaN(v) {
				continue
			}
			h := 1e-5 * v
			a, _ := tr.Forward(v + h)
			b, _ := tr.Forward(v - h)
			want += math.Log(math.Abs((a - b) / (2 * h)))
		}
		if got := tr.LogJacobian(x); math.Abs(got-want) > 1e-7*math.Max(1, math.Abs(want)) {
			t.Errorf("%v (Loc %v Scale %v): LogJacobian %v, finite difference %v", tr, tr.Loc, tr.Scale, got, want)
		}
	}
	if j := (Transform{Name: Log}).LogJacobian([]float64{1, -1}); !math.IsNaN(j) {
		t.Errorf("LogJacobian outside the domain = %v, want NaN", j)
	}
}

// Guerrero (1993): λ is the power for which s_j / m_j^{1−λ} is the same for every subseries.
// A series built so that s_j = c·m_j^{1−λ₀} exactly must return λ₀.
func TestGuerreroRecoversPower(t *testing.T) {
	pattern := []float64{-1.2, 0.3, 0.9, -0.4, 1.5, -0.8, 0.2, -0.5} // period 8
	for _, lambda0 := range []float64{-0.5, 0, 0.5, 1, 1.5} {
		var x []float64
		for j := range 12 {
			m := 50 * math.Pow(1.3, float64(j))
			sd := 0.02 * math.Pow(m, 1-lambda0)
			mu, s := stat.MeanStdDev(pattern, nil)
			for _, p := range pattern {
				x = append(x, m+sd*(p-mu)/s)
			}
		}
		x = append([]float64{100, 101, 102}, x...) // an incomplete first block, dropped
		got, err := Guerrero(x, len(pattern), -1, 2)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-lambda0) > 1e-6 {
			t.Errorf("λ₀ = %v: Guerrero = %v", lambda0, got)
		}
	}
}

func TestGuerreroErrors(t *testing.T) {
	if _, err := Guerrero([]float64{1, 2, 3, 4}, 2, 1, 1); !errors.Is(err, ErrBadArgument) {
		t.Errorf("empty interval: %v", err)
	}
	if _, err := Guerrero([]float64{1, 2, 0, 4}, 2, -1, 2); !errors.Is(err, ErrDomain) {
		t.Errorf("zero value: %v", err)
	}
	if _, err := Guerrero([]float64{5, 5, 5, 5, 5, 5}, 3, -1, 2); !errors.Is(err, ErrConstant) {
		t.Errorf("constant: %v", err)
	}
	if _, err := Guerrero([]float64{1, 2, 3}, 2, -1, 2); !errors.Is(err, ErrTooShort) {
		t.Errorf("short: %v", err)
	}
	// AirPassengers (R 4.2.2 `datasets`), monthly: the variance grows with the level, so λ
	// lies well below 1.
	lambda, err := Guerrero(refdata.Dataset(t, "AirPassengers"), 12, -1, 2)
	if err != nil || lambda < -1 || lambda > 0.5 {
		t.Errorf("AirPassengers λ = %v, %v", lambda, err)
	}
}

// Welford's running moments against gonum stat.MeanStdDev (two-pass), seeded data with a
// large offset, where the naive sum of squares loses digits.
func TestWelford(t *testing.T) {
	rng := rand.New(rand.NewPCG(10, 12))
	x := make([]float64, 5000)
	var w Welford
	for i := range x {
		x[i] = 1e6 + rng.NormFloat64()
		w.Add(x[i])
	}
	w.Add(math.NaN())
	mean, sd := stat.MeanStdDev(x, nil)
	if w.N != 5000 || math.Abs(w.Mean-mean) > 1e-6 || math.Abs(w.Std()-sd) > 1e-9*sd+1e-12 {
		t.Errorf("Welford %v %v %v, gonum %v %v", w.N, w.Mean, w.Std(), mean, sd)
	}
	tr := Freeze(Transform{Name: ScaledExp}, append(x, math.NaN()))
	if tr.Loc != w.Mean || tr.Scale != w.Std() {
		t.Errorf("Freeze: %+v, Welford %v %v", tr, w.Mean, w.Std())
	}
	if tr := Freeze(Transform{Name: ScaledExp}, []float64{4, 4}); tr.Scale != 1 || tr.Loc != 4 {
		t.Errorf("Freeze on a constant series: %+v", tr)
	}
	if tr := Freeze(Transform{Name: Log, Scale: 1}, x); tr.Loc != 0 || tr.Scale != 1 {
		t.Errorf("Freeze(log) changed the transform: %+v", tr)
	}
}

func TestFloorAt(t *testing.T) {
	v := []float64{90, 100, 120, math.NaN()}
	FloorAt(v, 100)
	if v[0] != 100 || v[1] != 100 || v[2] != 120 || !math.IsNaN(v[3]) {
		t.Errorf("FloorAt: %v", v)
	}
}

func TestNoAllocs(t *testing.T) {
	x := []float64{1, 2, 3, 4}
	dst := make([]float64, 4)
	for _, tr := range transformsUnderTest() {
		n := testing.AllocsPerRun(100, func() {
			_ = tr.ForwardSlice(dst, x)
			_, _ = tr.Inverse(1.5)
			_, _ = tr.Mean(30, 0.1)
			_ = tr.LogJacobian(x)
		})
		if n != 0 {
			t.Errorf("%v: %v allocations per run", tr, n)
		}
	}
}

func BenchmarkMeanScaledExp(b *testing.B) {
	tr := Transform{Name: ScaledExp, Loc: 500, Scale: 100}
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		_, _ = tr.Mean(20+float64(i%7), 1)
	}
}

func BenchmarkForwardSliceBoxCox(b *testing.B) {
	tr := Transform{Name: BoxCox, Lambda: 0.3, Scale: 1}
	x := make([]float64, 2000)
	for i := range x {
		x[i] = 100 + float64(i%24)
	}
	dst := make([]float64, len(x))
	b.ReportAllocs()
	for b.Loop() {
		_ = tr.ForwardSlice(dst, x)
	}
}

func BenchmarkGuerrero(b *testing.B) {
	x := make([]float64, 2000)
	for i := range x {
		x[i] = 100 + 10*math.Sin(float64(i)*2*math.Pi/24) + float64(i)/10
	}
	b.ReportAllocs()
	for b.Loop() {
		_, _ = Guerrero(x, 24, -1, 2)
	}
}

package stationarity

import (
	"fmt"
	"math"
)

// KPSSResult is the outcome of a KPSS test. The critical values are the asymptotic ones of
// Kwiatkowski et al. (1992), Table 1, for the regression used.
type KPSSResult struct {
	Stat, PValue                  float64
	Lags                          int
	Crit10, Crit5, Crit2_5, Crit1 float64
}

// kpssTable is Kwiatkowski, Phillips, Schmidt & Shin (1992), Table 1 (upper tail critical
// values of η̂_μ and η̂_τ); the same numbers are in REFERENCES.md.
var kpssTable = [2][4]float64{
	Constant: {0.347, 0.463, 0.574, 0.739},
	Trend:    {0.119, 0.146, 0.176, 0.216},
}

// kpssLevels are the upper-tail probabilities of the kpssTable columns.
var kpssLevels = [4]float64{0.10, 0.05, 0.025, 0.01}

// KPSS runs the Kwiatkowski–Phillips–Schmidt–Shin test of the null that x is level (Constant)
// or trend (Trend) stationary. With e_t the residuals of x on a constant (and t = 1..n),
// S_t = Σ_{s≤t} e_s and ℓ = lags,
//
//	η = Σ_t S_t² / (n²·s²(ℓ)),   s²(ℓ) = (1/n)·[Σ e_t² + 2·Σ_{i=1..ℓ} (1 − i/(ℓ+1))·Σ_t e_t e_{t−i}]
//
// (equations 10–11 of the paper; Bartlett weights). A negative lags takes statsmodels'
// "legacy" rule ℓ = ⌈12·(n/100)^{1/4}⌉, capped at n − 1 (the brief's int(·) would truncate;
// statsmodels 0.13.5 rounds up and the tests follow it); lags ≥ n returns ErrTooShort. The
// p-value interpolates linearly between the Table 1 entries and is clipped to [0.01, 0.10]:
// outside that range it only says "at most 0.01" or "at least 0.10".
//
// References:
//   - Kwiatkowski, D., Phillips, P. C. B., Schmidt, P. & Shin, Y. (1992). Testing the null
//     hypothesis of stationarity against the alternative of a unit root. Journal of
//     Econometrics 54, 159–178.
func KPSS(x []float64, reg Regression, lags int) (KPSSResult, error) {
	if err := reg.check(); err != nil {
		return KPSSResult{}, err
	}
	if err := checkSeries(x); err != nil {
		return KPSSResult{}, fmt.Errorf("stationarity: kpss: %w", err)
	}
	n := len(x)
	if n < reg.deterministic()+1 {
		return KPSSResult{}, fmt.Errorf("stationarity: kpss: %d values: %w", n, ErrTooShort)
	}
	if lags < 0 {
		lags = min(int(math.Ceil(12*math.Pow(float64(n)/100, 0.25))), n-1)
	}
	if lags >= n {
		return KPSSResult{}, fmt.Errorf("stationarity: kpss: %d lags on %d values (want lags < n): %w", lags, n, ErrTooShort)
	}
	e := residuals(x, reg)
	var eta, s, ss float64
	for _, v := range e {
		s += v
		eta += s * s
		ss += v * v
	}
	for i := 1; i <= lags; i++ {
		var c float64
		for t := i; t < n; t++ {
			c += e[t] * e[t-i]
		}
		ss += 2 * (1 - float64(i)/float64(lags+1)) * c
	}
	nf := float64(n)
	s2 := ss / nf
	if !(s2 > 0) {
		return KPSSResult{}, fmt.Errorf("stationarity: kpss: long-run variance %v: %w", s2, ErrConstant)
	}
	stat := eta / (nf * nf) / s2
	crit := kpssTable[reg]
	return KPSSResult{
		Stat: stat, PValue: kpssPValue(stat, crit), Lags: lags,
		Crit10: crit[0], Crit5: crit[1], Crit2_5: crit[2], Crit1: crit[3],
	}, nil
}

// residuals returns x less its mean (Constant) or less its least-squares line on t = 1..n
// (Trend).
func residuals(x []float64, reg Regression) []float64 {
	n := float64(len(x))
	var mx float64
	for _, v := range x {
		mx += v
	}
	mx /= n
	e := make([]float64, len(x))
	if reg == Constant {
		for i, v := range x {
			e[i] = v - mx
		}
		return e
	}
	mt := (n + 1) / 2
	var sxt, stt float64
	for i, v := range x {
		d := float64(i+1) - mt
		sxt += d * (v - mx)
		stt += d * d
	}
	b := sxt / stt
	for i, v := range x {
		e[i] = v - mx - b*(float64(i+1)-mt)
	}
	return e
}

// kpssPValue interpolates the p-value linearly in the table, clipped to [0.01, 0.10].
func kpssPValue(stat float64, crit [4]float64) float64 {
	if stat <= crit[0] {
		return kpssLevels[0]
	}
	for i := 1; i < len(crit); i++ {
		if stat <= crit[i] {
			f := (stat - crit[i-1]) / (crit[i] - crit[i-1])
			return kpssLevels[i-1] + f*(kpssLevels[i]-kpssLevels[i-1])
		}
	}
	return kpssLevels[len(kpssLevels)-1]
}

package arima

import (
	"fmt"
	"math"
)

// Guard configures the online check of a Filter for spikes and level
// shifts (SetGuard). The check is off until SetGuard is called, so a
// filter without it gives exactly the output of the plain Kalman filter.
//
// Each step computes the standardised one-step error
//
//	z_t = v_t / √(σ² F_t),
//
// v_t the prediction error and σ² F_t its variance, N(0, 1) under the
// model (Durbin & Koopman 2012, §2.12 and §7.5: the standardised
// innovations as the basis of diagnostics for outliers and breaks).
//
//   - Spike: |z_t| > Spike makes the observation an additive outlier. The
//     filter treats it as missing (Durbin & Koopman 2012, §4.10): the
//     state is predicted, not updated, so the value moves neither the
//     level nor the ARMA state; with differencing the level of that step
//     becomes an estimate carried in the state until later observations
//     pin it down again. This is the hard-rejection form of robust Kalman
//     filtering (a Huber-type ψ that is zero beyond the threshold: Masreliez
//     & Martin 1977; Fahrmeir & Künstler 1999; Durbin & Koopman §14.6).
//   - Level shift: a run of Run consecutive errors of the same sign, the
//     first beyond Shift, each later one beyond Shift/2, the run's mean
//     beyond Shift at every step and its median beyond Shift at the end
//     (so one large spike followed by ordinary values is not a shift; our
//     own rule, common practice),
//     is read as a change of level (a step intervention, Box & Tiao
//     1975; West & Harrison 1997, ch. 11, intervention by a shift of the
//     level with an increased prior variance; Harvey 1989, §7.6). At the
//     Run-th such step the level moves. With differencing it moves by ω̂,
//     the mean of the run's prediction errors: every level in the state
//     moves by ω̂ (the differences, and so the ARMA part, are unchanged)
//     and the estimate's variance, Inflate · σ² F_t / Run, is added to the
//     levels' covariance. Without differencing the constant (the mean of
//     the series) carries the shift as a regression coefficient on a step
//     from the run's first value, estimated by generalised least squares
//     from the run itself (Box & Tiao 1975's intervention estimate): the
//     filter goes back to its state before the run, absorbs the run's
//     values while the coefficient is re-estimated at each (shiftReplay,
//     learnStep); the coefficient goes on learning for 100 steps, and
//     while it does the forecasts' error variances include its variance
//     (times Inflate), as those of a regression coefficient do. The current observation is then absorbed normally.
//
// The defaults (DefaultGuard) are Spike 4.5, Shift 3 and Run 3 (common
// practice: a 4.5σ rule keeps the false-alarm rate of a Gaussian series
// near 7e-6 per step; a 3σ run of three has probability about 2e-8).
type Guard struct {
	Spike   float64 // |z| beyond which a value is an additive outlier (> Shift)
	Shift   float64 // |z| beyond which a value counts towards a level shift (> 0)
	Run     int     // consecutive same-signed values beyond Shift that make a shift (≥ 2)
	Inflate float64 // multiplies the shift's variance; 0 means 1
}

// DefaultGuard is the check with the thresholds of Guard's doc.
var DefaultGuard = Guard{Spike: 4.5, Shift: 3, Run: 3, Inflate: 1}

// Verdict is what the check made of a step.
type Verdict int

// The verdicts.
const (
	VerdictNone    Verdict = iota // normal step (or the check is off)
	VerdictOutlier                // additive outlier: treated as missing
	VerdictShift                  // level shift: the level moved
)

func (v Verdict) String() string {
	switch v {
	case VerdictNone:
		return "none"
	case VerdictOutlier:
		return "outlier"
	case VerdictShift:
		return "level shift"
	}
	return fmt.Sprintf("Verdict(%d)", int(v))
}

// guardState is the check's part of a Filter.
type guardState struct {
	on      bool
	g       Guard
	verdict Verdict
	z       float64   // last standardised error (NaN when none)
	runV    []float64 // prediction errors of the current run
	runS    []float64 // scratch for their median
	// Without differencing: the run's values (regressors removed) and
	// the filter's predicted state at its first step (a and P), from
	// which a shift's size is estimated by replaying the run (shiftReplay).
	runY       []float64
	runA, runP []float64
	runN       int
	runSign    float64
	runF       float64 // F of the run's first step
	runZ       float64 // Σ of the run's errors on that scale
	// shift is the sum of the level shifts applied to the constant of a
	// model without differencing (f.c = the model's constant + shift); it
	// is part of the saved state (AppendState).
	shift float64
	c0    float64 // the model's constant: f.c = c0 + shift after every change

	// After a shift in a model without differencing the constant keeps
	// learning for learn more steps (shiftLearn): lA is the filtered state
	// of the shift's column, lS and ls the sums Σ x̃²/F and Σ x̃ v/F of its
	// generalised least squares, lb the correction applied so far, lprec
	// the prior precision 1/v_ω of the run's estimate; lK is scratch.
	learn             int
	lS, ls, lb, lprec float64
	lA, lK            []float64
	xs                []float64 // scratch of the forecasts' sensitivity to it
}

// shiftLearn is the number of steps after a level shift in a model without
// differencing during which the constant keeps learning the shift's size
// (our own choice, common practice: a few dozen steps pin a mean down).
const shiftLearn = 100

// SetGuard turns the spike and level-shift check on with g (see Guard).
// It errors, leaving the filter unchanged, on thresholds that are not
// finite and positive, Spike ≤ Shift, Run < 2 or Inflate < 0. It
// allocates; Step with the check on does not.
func (f *Filter) SetGuard(g Guard) error {
	if !(g.Shift > 0) || math.IsInf(g.Shift, 0) || !(g.Spike > g.Shift) || math.IsInf(g.Spike, 0) || g.Run < 2 || !(g.Inflate >= 0) || math.IsInf(g.Inflate, 0) {
		return fmt.Errorf("arima: guard: %w: spike %v, shift %v, run %d, inflate %v: want 0 < shift < spike finite, run ≥ 2, inflate ≥ 0", ErrParams, g.Spike, g.Shift, g.Run, g.Inflate)
	}
	if g.Inflate == 0 {
		g.Inflate = 1
	}
	f.gd = guardState{on: true, g: g, z: math.NaN(), runV: make([]float64, g.Run), runS: make([]float64, g.Run), shift: f.gd.shift, c0: f.c - f.gd.shift,
		runY: make([]float64, g.Run), runA: make([]float64, f.r), runP: make([]float64, f.r*f.r),
		lA: make([]float64, f.r), lK: make([]float64, f.r), xs: make([]float64, f.maxH)}
	return nil
}

// LastVerdict returns what the check made of the last Step and that
// step's standardised one-step error z (NaN when the check is off, the
// value was missing, or the filter was still collecting its first levels).
func (f *Filter) LastVerdict() (Verdict, float64) {
	return f.gd.verdict, f.gd.z
}

// guardCheck runs the check on y (regressors already removed) and returns
// the value the filter should absorb: y, or NaN for an outlier.
func (f *Filter) guardCheck(y float64) float64 {
	gd := &f.gd
	gd.verdict, gd.z = VerdictNone, math.NaN()
	if math.IsNaN(y) || f.mode == modeWarm {
		if gd.learn > 0 {
			f.learnStep(math.NaN())
		}
		return y
	}
	y = f.guardJudge(y)
	if gd.learn > 0 {
		f.learnStep(y)
	}
	return y
}

// guardJudge is guardCheck's verdict on an observed y.
func (f *Filter) guardJudge(y float64) float64 {
	gd := &f.gd
	var v, F float64
	if f.mode == modeAug {
		mm := f.r + f.nd
		F = f.s.gain(f.Pa, f.mv, mm, true)
		v = y - f.c - f.s.zVec(f.xa)
	} else {
		w := y - f.c
		for _, j := range f.s.deltaNZ {
			w -= f.s.delta[j] * f.L[j]
		}
		v, F = w-f.a[0], f.P[0]
	}
	if !(F > 0) || math.IsInf(F, 0) {
		return y
	}
	z := v / math.Sqrt(f.sigma2*F)
	gd.z = z
	if gd.runN > 0 {
		// a run is open: its members are measured on the scale of its
		// first step, since the members before were not absorbed
		zr := v / math.Sqrt(f.sigma2*gd.runF)
		if math.Copysign(1, zr) == gd.runSign && math.Abs(zr) > gd.g.Shift/2 && math.Abs(gd.runZ+zr) > gd.g.Shift*float64(gd.runN+1) {
			gd.runZ += zr
			gd.runV[gd.runN] = v
			gd.runY[gd.runN] = y
			gd.runN++
			if gd.runN < gd.g.Run {
				gd.verdict = VerdictOutlier
				return math.NaN()
			}
			if math.Abs(median(gd.runS, gd.runV[:gd.runN])) <= gd.g.Shift*math.Sqrt(f.sigma2*gd.runF) {
				// one large value and ordinary ones: a spike, not a step
				gd.runN = 0
				goto fresh
			}
			if f.nd == 0 {
				f.shiftReplay()
				gd.runN = 0
				gd.verdict = VerdictShift
				return y
			}
			omega := 0.0
			for _, e := range gd.runV[:gd.runN] {
				omega += e
			}
			omega /= float64(gd.runN)
			f.shiftLevel(omega, gd.g.Inflate*gd.runF/float64(gd.runN))
			gd.runN = 0
			gd.verdict = VerdictShift
			return y
		}
		gd.runN = 0 // the run broke: this step is judged afresh
	}
fresh:
	if math.Abs(z) <= gd.g.Shift {
		return y
	}
	gd.runN, gd.runF, gd.runSign, gd.runZ = 1, F, math.Copysign(1, z), z
	gd.runV[0], gd.runY[0] = v, y
	if f.nd == 0 {
		copy(gd.runA, f.a)
		copy(gd.runP, f.P)
	}
	gd.verdict = VerdictOutlier
	return math.NaN()
}

// shiftLevel moves the levels of a model with differencing by omega with
// variance vw (unit-σ² scale).
func (f *Filter) shiftLevel(omega, vw float64) {
	r, nd := f.r, f.nd
	if f.mode != modeAug {
		f.enterAug()
	}
	mm := r + nd
	for i := r; i < mm; i++ {
		f.xa[i] += omega
		row := f.Pa[i*mm : (i+1)*mm]
		for j := r; j < mm; j++ {
			row[j] += vw
		}
	}
}

// shiftReplay is the level shift of a model without differencing,
// declared at the last step of the run (whose value the caller absorbs
// next): the shift's size is a regression coefficient on a step column
// from the run's first step on, estimated by generalised least squares
// from the run's own values, not from a prior (intervention analysis: Box
// & Tiao 1975, J. Am. Stat. Assoc. 70(349), the step's coefficient
// estimated given the model; as a regression coefficient in the augmented
// Kalman filter, de Jong 1991; Durbin & Koopman 2012, §6.2). The filter
// goes back to its predicted state at the run's first step (the run was
// kept out of it) and absorbs the run's values with learnStep correcting
// the constant as it goes, which then continues for shiftLearn steps in
// all. The estimate's variance, 1/Σ x̃²/F, widens the forecasts' bands
// meanwhile (shiftVariance).
func (f *Filter) shiftReplay() {
	gd := &f.gd
	n := gd.runN
	copy(f.a, gd.runA)
	copy(f.P, gd.runP)
	f.mode = modeFull
	gd.learn, gd.lS, gd.ls, gd.lb, gd.lprec = shiftLearn, 0, 0, 0, 0
	for i := range gd.lA {
		gd.lA[i] = 0
	}
	for _, y := range gd.runY[:n-1] {
		f.learnStep(y)
		f.fullStep(y - f.c)
	}
}

// shiftSens writes into x[k] the sensitivity of the forecast k+1 steps
// ahead to the shift's coefficient while it is learnt (model without
// differencing): x̃_k = 1 − Z T^k A, A the shift column's state through
// the filter (learnStep). It returns the coefficient's variance on the
// σ² scale times Inflate, 0 when nothing is being learnt.
func (f *Filter) shiftSens(x []float64) float64 {
	gd := &f.gd
	if !gd.on || gd.learn <= 0 || f.nd != 0 || !(gd.lS+gd.lprec > 0) {
		return 0
	}
	r, u := f.r, gd.lK // lK: scratch outside learnStep
	copy(u, gd.lA)
	for k := range x {
		x[k] = 1 - u[0]
		u0 := u[0]
		for i := 0; i < r-1; i++ {
			u[i] = u[i+1] + f.s.phi[i]*u0
		}
		u[r-1] = f.s.phi[r-1] * u0
	}
	return gd.g.Inflate * f.sigma2 / (gd.lS + gd.lprec)
}

// shiftVariance adds the shift coefficient's uncertainty to forecast
// error variances (Forecast): Var(b̂) x̃_k² (the augmented filter's mean
// square error, P + A S⁻¹ Aᵀ: Durbin & Koopman 2012, §6.2.2; de Jong
// 1991).
func (f *Filter) shiftVariance(variance []float64) {
	if f.gd.learn <= 0 {
		return
	}
	x := f.gd.xs[:len(variance)]
	if vb := f.shiftSens(x); vb > 0 {
		for k, v := range x {
			variance[k] += vb * v * v
		}
	}
}

// shiftCov is shiftVariance for the joint covariance (ForecastJoint, h×h).
func (f *Filter) shiftCov(cov []float64, h int) {
	if f.gd.learn <= 0 {
		return
	}
	x := f.gd.xs[:h]
	if vb := f.shiftSens(x); vb > 0 {
		for i := 0; i < h; i++ {
			for j := 0; j < h; j++ {
				cov[i*h+j] += vb * x[i] * x[j]
			}
		}
	}
}

// GuardStateLen is the length of the state AppendGuardState writes for a
// check with run length run on a filter of ARMA state dimension r.
func GuardStateLen(run, r int) int { return 7 + 2*run + r + r*r + 5 + r }

// AppendGuardState appends the check's state to dst: on, the last verdict
// and z, the open run (its length, sign, first F, sum of z, its Run
// prediction errors and values, and the filter's predicted state a and P
// at its first step), and the learning of a shift's size (steps left, the
// two sums, the correction, the prior precision and the column's state). With the filter's own state (AppendState, which
// carries the level shifts of the constant) it lets a restored filter
// with the same Guard continue bit for bit. A filter without the check
// appends nothing.
func (f *Filter) AppendGuardState(dst []float64) []float64 {
	gd := &f.gd
	if !gd.on {
		return dst
	}
	dst = append(dst, 1, float64(gd.verdict), gd.z, float64(gd.runN), gd.runSign, gd.runF, gd.runZ)
	dst = append(dst, gd.runV...)
	dst = append(dst, gd.runY...)
	dst = append(dst, gd.runA...)
	dst = append(dst, gd.runP...)
	dst = append(dst, float64(gd.learn), gd.lS, gd.ls, gd.lb, gd.lprec)
	return append(dst, gd.lA...)
}

// SetGuardState restores what AppendGuardState wrote, into a filter whose
// check was turned on (SetGuard) with the same Run. It errors, leaving
// the filter unchanged, on a state of another length or out of range.
func (f *Filter) SetGuardState(s []float64) error {
	gd := &f.gd
	if !gd.on || len(s) != GuardStateLen(gd.g.Run, f.r) || s[0] != 1 {
		return fmt.Errorf("arima: set guard state: %w: %d values for a check with run %d (on %v)", ErrState, len(s), gd.g.Run, gd.on)
	}
	v, n := Verdict(s[1]), int(s[3])
	if float64(v) != s[1] || v < VerdictNone || v > VerdictShift || float64(n) != s[3] || n < 0 || n >= gd.g.Run {
		return fmt.Errorf("arima: set guard state: %w: verdict %v, run length %v", ErrState, s[1], s[3])
	}
	i := 7 + 2*gd.g.Run + f.r + f.r*f.r
	learn := int(s[i])
	if float64(learn) != s[i] || learn < 0 || learn > shiftLearn {
		return fmt.Errorf("arima: set guard state: %w: %v learning steps", ErrState, s[i])
	}
	gd.verdict, gd.z, gd.runN, gd.runSign, gd.runF, gd.runZ = v, s[2], n, s[4], s[5], s[6]
	j := 7 + gd.g.Run
	copy(gd.runV, s[7:j])
	copy(gd.runY, s[j:j+gd.g.Run])
	j += gd.g.Run
	copy(gd.runA, s[j:j+f.r])
	copy(gd.runP, s[j+f.r:i])
	gd.learn, gd.lS, gd.ls, gd.lb, gd.lprec = learn, s[i+1], s[i+2], s[i+3], s[i+4]
	copy(gd.lA, s[i+5:])
	return nil
}

// learnStep refines the constant of a model without differencing after a
// level shift, at each step before the filter absorbs y (NaN: a step it
// only predicts). The shift's size is a regression coefficient b on the
// step column x_t = 1 from the shift on, with the run's estimate as the
// prior (variance v_ω); its filtered column x̃_t = 1 − Z A_t, A_t the
// column run through the filter's own gains, gives the generalised least
// squares estimate b̂ = Σ x̃v/F / (Σ x̃²/F + 1/v_ω), v the one-step errors of
// the uncorrected filter (the augmented Kalman filter for a regression
// coefficient: de Jong 1991, Ann. Statist. 19(2); Durbin & Koopman 2012,
// §6.2). Each change Δ of b̂ moves the constant by Δ and the state by
// −Δ·A (the filter is linear in its input), so the filter continues as if
// it had run with the constant corrected from the shift on.
func (f *Filter) learnStep(y float64) {
	gd := &f.gd
	r, A := f.r, gd.lA
	gd.learn--
	if math.IsNaN(y) {
		a0 := A[0]
		for i := 0; i < r-1; i++ {
			A[i] = A[i+1] + f.s.phi[i]*a0
		}
		A[r-1] = f.s.phi[r-1] * a0
		return
	}
	F := f.P[0]
	if !(F > 0) || math.IsInf(F, 0) {
		return
	}
	for i := 0; i < r; i++ {
		next := 0.0
		if i+1 < r {
			next = f.P[(i+1)*r]
		}
		gd.lK[i] = f.s.phi[i]*f.P[0] + next
	}
	x := 1 - A[0]
	v := y - f.c - f.a[0]
	gd.lS += x * x / F
	gd.ls += x * (v + gd.lb*x) / F
	b := gd.ls / (gd.lS + gd.lprec)
	d := b - gd.lb
	gd.lb = b
	gd.shift += d
	f.c = gd.c0 + gd.shift
	for i := range f.a {
		f.a[i] -= d * A[i]
	}
	a0, k := A[0], x/F
	for i := 0; i < r-1; i++ {
		A[i] = A[i+1] + f.s.phi[i]*a0 + gd.lK[i]*k
	}
	A[r-1] = f.s.phi[r-1]*a0 + gd.lK[r-1]*k
}

// median returns the median of v, using buf (len ≥ len(v)) as scratch.
func median(buf, v []float64) float64 {
	b := buf[:len(v)]
	copy(b, v)
	for i := 1; i < len(b); i++ {
		for j := i; j > 0 && b[j] < b[j-1]; j-- {
			b[j], b[j-1] = b[j-1], b[j]
		}
	}
	n := len(b)
	if n%2 == 1 {
		return b[n/2]
	}
	return (b[n/2-1] + b[n/2]) / 2
}

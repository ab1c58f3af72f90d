package calibrate

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Defaults of Options.
const (
	// DefaultRate is η, the step of the threshold update in units of |z|:
	// a miss raises a level's threshold by η(1 − α), a hit lowers it by ηα.
	DefaultRate = 0.02
	// DefaultBound is B, the cap on the score |z|; a threshold at or above B
	// covers every value.
	DefaultBound = 10
	// DefaultMemory is the number of buckets over which Coverage forgets
	// (an exponential weight of 1 − 1/DefaultMemory per closed bucket).
	DefaultMemory = 500
)

// stateVersion tags the layout written by AppendState.
const stateVersion = 1

// Options configures New. The zero value of a field means its default.
type Options struct {
	Horizon int       // H, steps ahead, ≥ 1 (required)
	Levels  []float64 // central levels in percent, ascending, each in (0, 100) (required)
	Rate    float64   // η > 0; 0 means DefaultRate
	Bound   float64   // B > 0; 0 means DefaultBound
	Memory  float64   // buckets of Coverage's memory, ≥ 1; 0 means DefaultMemory
}

// Calibrator holds the calibration of one series: per horizon h = 1..H and
// level l the threshold q_{h,l} on the standardised error |z| (the band is
// median ± q_{h,l}·sd on the model scale), the forecasts issued and not yet
// realised, and the recent realised coverage per level. See the package
// documentation for the method. It is not safe for concurrent use.
type Calibrator struct {
	h, nl        int
	levels       []float64 // percent
	miss         []float64 // α_l = 1 − level/100
	zq           []float64 // Φ⁻¹(1 − α_l/2), the model's own multiplier
	eta, bound   float64
	decay        float64   // 1 − 1/Memory
	q            []float64 // H×L, row h−1
	covW, covN   []float64 // per level: weighted hits and weighted count
	t            uint64    // buckets observed
	cur          []int32   // per horizon h (index h−1): t mod h
	off          []int     // per horizon: offset of its ring in med/isd
	med          []float64 // pending medians, NaN = nothing pending
	isd          []float32 // pending 1/sd
	pq           []float32 // pending: the thresholds it was issued with, L per forecast
	updates      uint64    // (h, l) updates applied
	pendingCount int
}

// New returns a calibrator whose thresholds are the model's own
// (q_{h,l} = Φ⁻¹(1 − α_l/2), factor 1) until WarmStart or the online
// updates move them.
func New(o Options) (*Calibrator, error) {
	if o.Rate == 0 {
		o.Rate = DefaultRate
	}
	if o.Bound == 0 {
		o.Bound = DefaultBound
	}
	if o.Memory == 0 {
		o.Memory = DefaultMemory
	}
	var problems []string
	if o.Horizon < 1 || o.Horizon > math.MaxInt32 {
		problems = append(problems, fmt.Sprintf("horizon %d (want ≥ 1)", o.Horizon))
	}
	if len(o.Levels) == 0 {
		problems = append(problems, "no levels")
	}
	for i, l := range o.Levels {
		if !(l > 0 && l < 100) {
			problems = append(problems, fmt.Sprintf("level %v (want 0 < level < 100)", l))
		} else if i > 0 && !(l > o.Levels[i-1]) {
			problems = append(problems, fmt.Sprintf("levels %v not ascending", o.Levels))
		}
	}
	if !(o.Rate > 0) || math.IsInf(o.Rate, 0) {
		problems = append(problems, fmt.Sprintf("rate %v (want > 0)", o.Rate))
	}
	if !(o.Bound > 0) || math.IsInf(o.Bound, 0) {
		problems = append(problems, fmt.Sprintf("bound %v (want > 0)", o.Bound))
	}
	if !(o.Memory >= 1) || math.IsInf(o.Memory, 0) {
		problems = append(problems, fmt.Sprintf("memory %v (want ≥ 1)", o.Memory))
	}
	if len(problems) > 0 {
		return nil, fmt.Errorf("%w: %s", ErrOptions, joinProblems(problems))
	}
	H, nl := o.Horizon, len(o.Levels)
	c := &Calibrator{
		h: H, nl: nl,
		levels: append([]float64(nil), o.Levels...),
		miss:   make([]float64, nl),
		zq:     make([]float64, nl),
		eta:    o.Rate, bound: o.Bound, decay: 1 - 1/o.Memory,
		q:    make([]float64, H*nl),
		covW: make([]float64, nl), covN: make([]float64, nl),
		cur: make([]int32, H),
		off: make([]int, H),
	}
	for l, lv := range o.Levels {
		c.miss[l] = 1 - lv/100
		c.zq[l] = distuv.UnitNormal.Quantile(1 - c.miss[l]/2)
	}
	c.Reset()
	n := 0
	for h := 1; h <= H; h++ {
		c.off[h-1] = n
		n += h
	}
	c.pendingCount = n
	c.med = make([]float64, n)
	c.isd = make([]float32, n)
	c.pq = make([]float32, n*nl)
	for i := range c.med {
		c.med[i] = math.NaN()
	}
	return c, nil
}

func joinProblems(p []string) string {
	s := p[0]
	for _, v := range p[1:] {
		s += "; " + v
	}
	return s
}

// Reset returns every threshold to the model's own, q_{h,l} = Φ⁻¹(1 − α_l/2)
// (factor 1). Pending forecasts and coverage are kept.
func (c *Calibrator) Reset() {
	for h := 0; h < c.h; h++ {
		copy(c.q[h*c.nl:(h+1)*c.nl], c.zq)
	}
}

// Horizon returns H.
func (c *Calibrator) Horizon() int { return c.h }

// Levels returns the levels in percent (read-only).
func (c *Calibrator) Levels() []float64 { return c.levels }

// Observe takes the value y of the bucket that just closed, on the model's
// scale (NaN: missing), and resolves every forecast issued for it: the
// forecast issued h buckets earlier for horizon h, for h = 1..H. For each
// such forecast with median m and standard deviation s, issued with the
// threshold q' (Threshold(h, l) when it was issued: the band it was
// published with), and each level l,
//
//	S = min(|y − m|/s, B),  err = 1{S > q'},  q_{h,l} ← q_{h,l} + η(err − α_l)
//
// (quantile tracking; in the parameter α_t = 1 − q/B this is the update of
// adaptive conformal inference, α_{t+1} = α_t + γ(α − err_t) with γ = η/B,
// with the feedback of horizon h arriving h buckets late). err is the miss
// of the band as published, so the long-run bound of the package
// documentation is a bound on the published bands' miss rate.
// A missing y resolves nothing. Call Observe before Issue for the origin
// at the same bucket. It does not allocate.
func (c *Calibrator) Observe(y float64) {
	c.t++
	nl := c.nl
	for l := 0; l < nl; l++ {
		c.covW[l] *= c.decay
		c.covN[l] *= c.decay
	}
	ok := y-y == 0 // finite
	med, isd, off, cur := c.med, c.isd, c.off, c.cur[:len(c.off)]
	miss, covW, covN := c.miss[:nl], c.covW[:nl], c.covN[:nl]
	eta, bound := c.eta, c.bound
	var resolved uint64
	for h := range cur {
		k := cur[h] + 1
		if int(k) > h {
			k = 0
		}
		cur[h] = k
		i := off[h] + int(k)
		m := med[i]
		if m != m { // NaN: nothing pending
			continue
		}
		med[i] = math.NaN()
		if !ok {
			continue
		}
		s := math.Abs(y-m) * float64(isd[i])
		if s > bound { // also +Inf
			s = bound
		}
		q := c.q[h*nl : h*nl+nl]
		qi := c.pq[i*nl : i*nl+nl]
		for l := range q {
			e := 0.0
			if s > float64(qi[l]) {
				e = 1
			}
			q[l] += eta * (e - miss[l])
			covW[l] += 1 - e
			covN[l]++
		}
		resolved++
	}
	c.updates += resolved * uint64(nl)
}

// Issue records the forecast issued at the bucket last passed to Observe:
// median[h−1] and sd[h−1] on the model's scale for h = 1..H, with the
// thresholds Threshold(h, l) its bands are published with. A step whose
// sd is not positive and finite, or whose median is not finite, is not
// recorded (it will resolve nothing). It panics if len(median) or len(sd)
// is not H (a programmer error). It does not allocate.
func (c *Calibrator) Issue(median, sd []float64) {
	if len(median) != c.h || len(sd) != c.h {
		panic(fmt.Sprintf("calibrate: Issue: %d medians and %d sds, horizon %d", len(median), len(sd), c.h))
	}
	med, isd, off, cur := c.med, c.isd, c.off[:len(median)], c.cur[:len(median)]
	sd = sd[:len(median)]
	nl, bound := c.nl, c.bound
	for h, m := range median {
		i := off[h] + int(cur[h])
		// One test for everything: m − m is 0 only for a finite m, and
		// 1/sd in float32 is positive and finite only for a positive,
		// finite sd that float32 can invert (NaN fails every comparison).
		inv := float32(1 / sd[h])
		if m-m == 0 && inv > 0 && inv <= math.MaxFloat32 {
			med[i], isd[i] = m, inv
			// Threshold(h, l) for every l: the running maximum over the
			// lower levels, capped at B (as Thresholds).
			row, out := c.q[h*nl:h*nl+nl], c.pq[i*nl:i*nl+nl]
			v := 0.0
			for l, q := range row {
				if q > v {
					v = q
				}
				out[l] = float32(min(v, bound))
			}
		} else {
			med[i] = math.NaN()
		}
	}
}

// Threshold returns the calibrated multiplier of the sd at horizon h
// (1-based) and level index l: the band on the model's scale is
// median ± Threshold(h, l)·sd. It is q_{h,l} clamped to [0, B] and raised
// to the threshold of any lower level, so that the bands of higher levels
// contain those of lower ones.
func (c *Calibrator) Threshold(h, l int) float64 {
	row := c.q[(h-1)*c.nl : h*c.nl]
	v := 0.0
	for j := 0; j <= l; j++ {
		v = math.Max(v, row[j])
	}
	return math.Min(v, c.bound)
}

// Factor returns Threshold(h, l)/Φ⁻¹(1 − α_l/2): how much wider (> 1) or
// narrower (< 1) the calibrated band is than the model's own band at that
// horizon and level.
func (c *Calibrator) Factor(h, l int) float64 { return c.Threshold(h, l) / c.zq[l] }

// Thresholds writes Threshold(h, l) for h = 1..H, l over the levels into
// dst (length H·L, row h−1 holding the levels), without allocating. It
// panics if len(dst) != H·L.
func (c *Calibrator) Thresholds(dst []float64) {
	if len(dst) != c.h*c.nl {
		panic(fmt.Sprintf("calibrate: Thresholds: len(dst) = %d, want %d", len(dst), c.h*c.nl))
	}
	nl, bound := c.nl, c.bound
	for i := 0; i+nl <= len(c.q); i += nl {
		row, out := c.q[i:i+nl], dst[i:i+nl]
		v := 0.0
		for l, q := range row { // Threshold(h, l): the running maximum, capped at B
			if q > v {
				v = q
			}
			out[l] = min(v, bound)
		}
	}
}

// Coverage returns the recent realised coverage of level index l: the
// share of resolved forecasts (all horizons) that fell inside their band,
// each bucket's results weighted 1 − 1/Memory less per later bucket, and
// the weighted count behind it. Before anything resolved it is NaN, 0.
func (c *Calibrator) Coverage(l int) (share, weight float64) {
	if c.covN[l] == 0 {
		return math.NaN(), 0
	}
	return c.covW[l] / c.covN[l], c.covN[l]
}

// Updates returns the number of (horizon, level) updates applied so far.
func (c *Calibrator) Updates() uint64 { return c.updates }

// KeepsAtRefit reports whether a refit of the series' model should keep
// the thresholds rather than warm-start them: true once an online update
// has been applied. Adaptive conformal inference lets the score function
// change at every step, a model refitted on newer data included (Gibbs &
// Candès 2021, §2: the model is re-estimated as the data arrive), and its
// Proposition 1 needs only that α_t moves by the online update alone;
// replacing the thresholds at each refit would add a jump to the sum the
// bound telescopes, and the long-run bound would no longer hold for the
// running series. So the warm start serves only a calibrator that has not
// yet seen a realised value (the first fit, or a record without
// calibration state).
func (c *Calibrator) KeepsAtRefit() bool { return c.updates > 0 }

// AppendState appends the fixed-size state to dst and returns the extended
// slice (all float64): version, H, L, buckets observed, updates, η, B,
// memory weight, the levels (L), the thresholds q (H·L, horizon-major) and
// the coverage sums (2L). That is 8 + L + H·L + 2L values: 1 072 bytes at
// H = 60 with two levels. Pending forecasts are not included (AppendPending).
func (c *Calibrator) AppendState(dst []float64) []float64 {
	dst = append(dst, stateVersion, float64(c.h), float64(c.nl), float64(c.t), float64(c.updates),
		c.eta, c.bound, c.decay)
	dst = append(dst, c.levels...)
	dst = append(dst, c.q...)
	dst = append(dst, c.covW...)
	dst = append(dst, c.covN...)
	return dst
}

// StateLen returns the number of float64 values AppendState writes.
func (c *Calibrator) StateLen() int { return 8 + c.nl + c.h*c.nl + 2*c.nl }

// SetState restores a state written by AppendState of a calibrator with the
// same horizon and levels; η, B and the memory come from the state. On
// error (wrapping ErrState) the calibrator is unchanged. Pending forecasts
// are left as they are.
func (c *Calibrator) SetState(s []float64) error {
	bad := func(why string) error { return fmt.Errorf("calibrate: set state: %w: %s", ErrState, why) }
	if len(s) < 8 {
		return bad(fmt.Sprintf("%d values, shorter than the 8-value header", len(s)))
	}
	if s[0] != stateVersion {
		return bad(fmt.Sprintf("layout version %v, want %d", s[0], stateVersion))
	}
	if s[1] != float64(c.h) || s[2] != float64(c.nl) {
		return bad(fmt.Sprintf("horizon %v with %v levels, this calibrator has %d and %d", s[1], s[2], c.h, c.nl))
	}
	if len(s) != c.StateLen() {
		return bad(fmt.Sprintf("%d values, want %d", len(s), c.StateLen()))
	}
	t, upd, eta, bound, decay := s[3], s[4], s[5], s[6], s[7]
	if !(t >= 0 && t < 1<<53) || !(upd >= 0 && upd < 1<<53) || !(eta > 0) || math.IsInf(eta, 0) ||
		!(bound > 0) || math.IsInf(bound, 0) || !(decay >= 0 && decay < 1) {
		return bad(fmt.Sprintf("header counts %v, %v, rate %v, bound %v, memory weight %v out of range", t, upd, eta, bound, decay))
	}
	lv := s[8 : 8+c.nl]
	for l := range lv {
		if lv[l] != c.levels[l] {
			return bad(fmt.Sprintf("levels %v, this calibrator has %v", lv, c.levels))
		}
	}
	rest := s[8+c.nl:]
	for _, v := range rest {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return bad("a threshold or coverage sum is not finite")
		}
	}
	c.t, c.updates, c.eta, c.bound, c.decay = uint64(t), uint64(upd), eta, bound, decay
	copy(c.q, rest[:c.h*c.nl])
	copy(c.covW, rest[c.h*c.nl:c.h*c.nl+c.nl])
	copy(c.covN, rest[c.h*c.nl+c.nl:])
	for h := range c.cur {
		c.cur[h] = int32(c.t % uint64(h+1))
	}
	return nil
}

// AppendPending appends the forecasts issued and not yet realised,
// H(H+1)/2 tuples (median, 1/sd, then the L thresholds they were issued
// with; NaN median: none), and returns the extended slice: 8(2 + L) bytes
// a tuple, 58 560 bytes at H = 60 with two levels. Restoring them with
// SetPending after SetState continues the updates exactly; without them
// each horizon h misses at most h updates after a restart.
func (c *Calibrator) AppendPending(dst []float64) []float64 {
	nl := c.nl
	for i, m := range c.med {
		dst = append(dst, m, float64(c.isd[i]))
		for _, q := range c.pq[i*nl : i*nl+nl] {
			dst = append(dst, float64(q))
		}
	}
	return dst
}

// SetPending restores what AppendPending wrote (after SetState, which sets
// the ring positions). On error (wrapping ErrState) nothing changes.
func (c *Calibrator) SetPending(s []float64) error {
	w := 2 + c.nl
	if len(s) != w*c.pendingCount {
		return fmt.Errorf("calibrate: set pending: %w: %d values, want %d", ErrState, len(s), w*c.pendingCount)
	}
	for i := 0; i < c.pendingCount; i++ {
		m, v := s[w*i], s[w*i+1]
		if !math.IsNaN(m) && (math.IsInf(m, 0) || !(v > 0) || math.IsInf(v, 0)) {
			return fmt.Errorf("calibrate: set pending: %w: forecast %d is (%v, %v)", ErrState, i, m, v)
		}
		for _, q := range s[w*i+2 : w*i+w] {
			if !math.IsNaN(m) && !(q >= 0 && q <= c.bound) {
				return fmt.Errorf("calibrate: set pending: %w: forecast %d threshold %v", ErrState, i, q)
			}
		}
	}
	for i := 0; i < c.pendingCount; i++ {
		c.med[i], c.isd[i] = s[w*i], float32(s[w*i+1])
		for l := 0; l < c.nl; l++ {
			c.pq[i*c.nl+l] = float32(s[w*i+2+l])
		}
	}
	return nil
}

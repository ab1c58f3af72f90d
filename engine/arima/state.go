package arima

import (
	"fmt"
	"math"
)

// stateVersion tags the layout written by AppendState.
const stateVersion = 1

const stateHeader = 8

// AppendState appends to dst everything needed to resume the filter
// exactly, and returns the extended slice. Layout (all float64):
//
//	version, r, d+sD, mode, warm-up count, warm-up had a missing value,
//	ready, M (Chandrasekhar scalar),
//	warm-up values (d+sD), anchors (d+sD), a (r), W (r), K (r), P (r·r),
//	and with the levels in the state: x (r+d+sD), P (r+d+sD)²,
//	and with regressors (NewFilterX): the data time of the next step,
//	and, only after a level shift of the online check (SetGuard) in a model
//	without differencing: the sum of the shifts of the constant.
//
// The model itself is not included: restore into a filter built by
// NewFilter from the same model.
func (f *Filter) AppendState(dst []float64) []float64 {
	b2f := func(b bool) float64 {
		if b {
			return 1
		}
		return 0
	}
	dst = append(dst, stateVersion, float64(f.r), float64(f.nd), float64(f.mode),
		float64(f.nWarm), b2f(f.warmNaN), b2f(f.ready), f.M)
	dst = append(dst, f.warm...)
	dst = append(dst, f.L...)
	dst = append(dst, f.a...)
	dst = append(dst, f.W...)
	dst = append(dst, f.K...)
	dst = append(dst, f.P...)
	if f.mode == modeAug {
		dst = append(dst, f.xa...)
		dst = append(dst, f.Pa...)
	}
	if f.gen != nil {
		dst = append(dst, f.next)
	}
	if f.gd.shift != 0 {
		dst = append(dst, f.gd.shift)
	}
	return dst
}

// SetState restores a state written by AppendState of a filter of the same
// model; subsequent output is bit-for-bit that of the original filter. It
// returns an error wrapping ErrState, and leaves the filter unchanged, when
// s does not fit this filter.
func (f *Filter) SetState(s []float64) error {
	bad := func(why string) error { return fmt.Errorf("arima: set state: %w: %s", ErrState, why) }
	if len(s) < stateHeader {
		return bad(fmt.Sprintf("%d values, shorter than the %d-value header", len(s), stateHeader))
	}
	if s[0] != stateVersion {
		return bad(fmt.Sprintf("layout version %v, want %d", s[0], stateVersion))
	}
	if s[1] != float64(f.r) || s[2] != float64(f.nd) {
		return bad(fmt.Sprintf("state dimension %v and %v levels, this model has %d and %d", s[1], s[2], f.r, f.nd))
	}
	mode := int(s[3])
	if float64(mode) != s[3] || mode < modeWarm || mode > modeAug || (f.nd == 0 && (mode == modeWarm || mode == modeAug)) {
		return bad(fmt.Sprintf("unknown mode %v", s[3]))
	}
	nWarm := int(s[4])
	if float64(nWarm) != s[4] || nWarm < 0 || nWarm > f.nd {
		return bad(fmt.Sprintf("warm-up count %v out of range", s[4]))
	}
	r, nd, mm := f.r, f.nd, f.r+f.nd
	want := stateHeader + 2*nd + 3*r + r*r
	if mode == modeAug {
		want += mm + mm*mm
	}
	if f.gen != nil {
		want++
	}
	shifted := nd == 0 && len(s) == want+1
	if len(s) != want && !shifted {
		return bad(fmt.Sprintf("%d values, want %d", len(s), want))
	}
	for _, v := range s[stateHeader:] {
		if math.IsInf(v, 0) {
			return bad("infinite value")
		}
	}
	if mode == modeAug {
		f.allocAug()
	}
	f.mode, f.nWarm, f.warmNaN, f.ready, f.M = mode, nWarm, s[5] != 0, s[6] != 0, s[7]
	i := stateHeader
	for _, dst := range [][]float64{f.warm, f.L, f.a, f.W, f.K, f.P} {
		i += copy(dst, s[i:i+len(dst)])
	}
	if mode == modeAug {
		i += copy(f.xa, s[i:i+mm])
		i += copy(f.Pa, s[i:i+mm*mm])
	}
	if f.gen != nil {
		f.next = s[i]
		i++
	}
	shift := 0.0
	if shifted {
		shift = s[i]
	}
	if f.gd.on {
		f.c = f.gd.c0 + shift // as the check sets it
	} else {
		f.c += shift - f.gd.shift
	}
	f.gd.shift = shift
	return nil
}

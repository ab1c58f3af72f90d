package auto

import (
	"fmt"

	"forewarn/engine/arima"
	"forewarn/engine/transform"
)

// warm refits the previous spec and transform from the previous
// parameters, then tries ±1 on p and on q, each started from the previous
// parameters (package doc, "Fixed model, warm start").
func (s *selector) warm() (*Choice, error) {
	s.countObs()
	w := s.o.Warm
	spec := w.Spec
	if err := spec.Validate(); err != nil {
		return nil, fmt.Errorf("%w: warm spec: %w", ErrBadOptions, err)
	}
	tr := transform.Freeze(w.Transform, s.y)
	c := &scaled{tr: tr, w: make([]float64, len(s.y)), cache: map[arima.Spec]*fitted{}}
	if err := tr.ForwardSlice(c.w, s.y); err != nil {
		return nil, fmt.Errorf("%w: %w", ErrDomain, err)
	}
	s.d, s.sd, s.period = spec.D, spec.SD, spec.Period
	s.seasonal = spec.Period >= 2
	c.jac = jacobian(tr, s.y, s.d+s.period*s.sd)

	best := s.fit(c, spec, w.Params)
	constant := spec.Mean || spec.Drift
	fixed := s.o.Model != "" && s.o.Model != "auto" // a fixed order keeps its order
	for _, dv := range [][2]int{{-1, 0}, {1, 0}, {0, -1}, {0, 1}} {
		p, q := spec.P+dv[0], spec.Q+dv[1]
		if fixed || !s.inBounds(p, q, spec.SP, spec.SQ) {
			continue
		}
		nb := s.spec(p, q, spec.SP, spec.SQ, constant)
		if f := s.fit(c, nb, adjustStart(w.Params, spec, nb)); f != nil && (best == nil || f.aicc < best.aicc) {
			best = f
		}
	}
	if best == nil {
		return s.choice(nil, nil)
	}
	return s.choice(c, best)
}

// adjustStart maps params of spec from (arima.Model.Params layout: AR, MA,
// SAR, SMA, mean, drift) onto the layout of spec to: each block is cut or
// padded with zeros, so the start is the previous model seen as a member
// of the new one where they nest.
func adjustStart(params []float64, from, to arima.Spec) []float64 {
	if len(params) != from.NumParams() {
		return nil
	}
	blocks := func(s arima.Spec) []int {
		return []int{s.P, s.Q, s.SP, s.SQ, b2i(s.Mean), b2i(s.Drift)}
	}
	fb, tb := blocks(from), blocks(to)
	out := make([]float64, 0, to.NumParams())
	off := 0
	for i := range fb {
		for j := 0; j < tb[i]; j++ {
			v := 0.0
			if j < fb[i] {
				v = params[off+j]
			}
			out = append(out, v)
		}
		off += fb[i]
	}
	return out
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

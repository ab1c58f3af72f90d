package series

import (
	"fmt"
	"math"

	"forewarn/engine/arima"
	"forewarn/engine/outlier"
)

// Column-set kinds of a model's regression design (ColumnSet.Kind). The
// design is a list of column sets so that a new kind of regressor is one
// more case here and in package state's record.
const (
	// SetFourier: sin/cos pairs of seasonal cycles from absolute data
	// time (arima.Fourier). Values: the step in seconds, then per cycle
	// its length in seconds and its pairs K.
	SetFourier uint8 = 1
	// SetEffects: additive outliers, level shifts and temporary changes
	// found at the refit (outlier.Detect). Values: δ of a temporary
	// change, then per effect its kind (outlier.Kind) and bucket index.
	SetEffects uint8 = 2
	// SetProfile: one seasonal-shape column per cycle (arima.Profile, the
	// profile route of auto.Select), phase from absolute data time.
	// Values: per cycle its length in seconds, its number of samples M
	// and the M samples of its shape (sample k at phase k/M).
	SetProfile uint8 = 3
)

// seasonal is the generator of a design's seasonal columns
// (arima.Fourier or arima.Profile).
type seasonal interface {
	arima.Regressors
	arima.RegressorPath
}

// ColumnSet is one block of regression columns of a model, in the order
// of the model's β (arima.Model.Beta).
type ColumnSet struct {
	Kind   uint8
	Values []float64
}

// design is the regressors of a model (arima.Regressors) at absolute data
// time t in seconds: its column sets one after the other. It implements
// arima.RegressorPath, so the filter's forecasts take the Fourier part in
// one pass by rotations. It does not allocate once built.
type design struct {
	sets    []ColumnSet
	season  seasonal // SetFourier's or SetProfile's generator, nil without
	nf      int      // its columns
	effects []effect
	delta   float64
	step    float64 // seconds
	ncol    int
	scratch []float64 // LinearPath's Fourier part
}

// effect is one column of SetEffects.
type effect struct {
	kind   outlier.Kind
	bucket int64
}

// newDesign builds the regressors of the column sets for series of step
// seconds and a forecast horizon of h (the scratch of LinearPath).
func newDesign(sets []ColumnSet, step float64, h int) (*design, error) {
	d := &design{sets: sets, step: step, delta: outlier.Delta}
	for _, cs := range sets {
		switch cs.Kind {
		case SetFourier:
			if d.season != nil || len(cs.Values) < 3 || len(cs.Values)%2 != 1 {
				return nil, fmt.Errorf("series: design: a Fourier column set of %d values (want one, of the step and a length and K per cycle)", len(cs.Values))
			}
			var cycles []arima.Cycle
			for i := 1; i < len(cs.Values); i += 2 {
				k := int(cs.Values[i+1])
				if float64(k) != cs.Values[i+1] {
					return nil, fmt.Errorf("series: design: Fourier pairs %v are not a whole number", cs.Values[i+1])
				}
				cycles = append(cycles, arima.Cycle{Seconds: cs.Values[i], K: k})
			}
			f, err := arima.NewFourier(cycles, cs.Values[0])
			if err != nil {
				return nil, fmt.Errorf("series: design: %w", err)
			}
			d.season, d.nf = f, f.NumRegressors()
			d.ncol += d.nf
		case SetProfile:
			if d.season != nil {
				return nil, fmt.Errorf("series: design: a second seasonal column set")
			}
			cycles, shapes, err := profileValues(cs.Values)
			if err != nil {
				return nil, err
			}
			p, err := arima.NewProfile(cycles, shapes)
			if err != nil {
				return nil, fmt.Errorf("series: design: %w", err)
			}
			d.season, d.nf = p, p.NumRegressors()
			d.ncol += d.nf
		case SetEffects:
			if d.effects != nil || len(cs.Values) < 3 || len(cs.Values)%2 != 1 {
				return nil, fmt.Errorf("series: design: an effects column set of %d values (want one, of δ and a kind and bucket per effect)", len(cs.Values))
			}
			if dl := cs.Values[0]; !(dl > 0 && dl < 1) {
				return nil, fmt.Errorf("series: design: temporary-change decay %v (want 0 < δ < 1)", dl)
			}
			d.delta = cs.Values[0]
			for i := 1; i < len(cs.Values); i += 2 {
				k, b := outlier.Kind(cs.Values[i]), int64(cs.Values[i+1])
				if float64(k) != cs.Values[i] || k < outlier.AO || k > outlier.TC || float64(b) != cs.Values[i+1] {
					return nil, fmt.Errorf("series: design: effect kind %v at bucket %v", cs.Values[i], cs.Values[i+1])
				}
				d.effects = append(d.effects, effect{kind: k, bucket: b})
			}
			d.ncol += len(d.effects)
		default:
			return nil, fmt.Errorf("series: design: unknown column-set kind %d", cs.Kind)
		}
	}
	if d.sets[0].Kind == SetEffects && d.season != nil {
		return nil, fmt.Errorf("series: design: the seasonal columns come first")
	}
	d.scratch = make([]float64, h)
	return d, nil
}

// NumRegressors implements arima.Regressors.
func (d *design) NumRegressors() int { return d.ncol }

// Regressors implements arima.Regressors: the row at data time t (seconds).
func (d *design) Regressors(dst []float64, t float64) {
	if d.season != nil {
		d.season.Regressors(dst, t)
	}
	b := int64(math.Floor(t/d.step + 0.5))
	for i, e := range d.effects {
		dst[d.nf+i] = outlier.Value(e.kind, 0, int(b-e.bucket), d.delta)
	}
}

// LinearPath implements arima.RegressorPath.
func (d *design) LinearPath(dst, beta []float64, t0, step float64) {
	for k := range dst {
		dst[k] = 0
	}
	if d.season != nil {
		d.season.LinearPath(d.scratch[:len(dst)], beta[:d.nf], t0, step)
		copy(dst, d.scratch[:len(dst)])
	}
	for k := range dst {
		b := int64(math.Floor((t0+float64(k)*step)/d.step + 0.5))
		for i, e := range d.effects {
			dst[k] += beta[d.nf+i] * outlier.Value(e.kind, 0, int(b-e.bucket), d.delta)
		}
	}
}

// profileValues is SetProfile's Values: per cycle its length in seconds,
// its number of samples M and the M samples.
func profileValues(v []float64) (cycles []float64, shapes [][]float64, err error) {
	for i := 0; i < len(v); {
		if len(v)-i < 2 {
			return nil, nil, fmt.Errorf("series: design: a profile column set ends inside cycle %d's header", len(cycles)+1)
		}
		m := v[i+1]
		if !(m >= 2) || m != math.Trunc(m) || m > float64(len(v)-i-2) {
			return nil, nil, fmt.Errorf("series: design: profile cycle %d has %v samples with %d values left", len(cycles)+1, m, len(v)-i-2)
		}
		cycles = append(cycles, v[i])
		shapes = append(shapes, v[i+2:i+2+int(m)])
		i += 2 + int(m)
	}
	if len(cycles) == 0 {
		return nil, nil, fmt.Errorf("series: design: an empty profile column set")
	}
	return cycles, shapes, nil
}

// profileSet is the SetProfile column set of the cycles (seconds) and
// their shapes.
func profileSet(cycles []float64, shapes [][]float64) ColumnSet {
	var v []float64
	for c, L := range cycles {
		v = append(v, L, float64(len(shapes[c])))
		v = append(v, shapes[c]...)
	}
	return ColumnSet{Kind: SetProfile, Values: v}
}

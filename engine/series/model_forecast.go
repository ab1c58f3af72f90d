package series

import (
	"math"
	"time"

	"forewarn/engine/transform"
)

// ModelForecast is a forecast on the model scale together with everything
// that turns it into raw units: Fill makes the Forecast a series
// publishes. A series keeps one and fills its own Forecast from it only
// when asked (Series.Forecast); a copy (CopyFrom) can be filled on another
// goroutine with the same result, bit for bit, since Fill is a function of
// the copy alone.
type ModelForecast struct {
	Topic       string
	Kind        string // "gauge" or "counter"
	StepSeconds int64
	End         int64   // bucket index of the origin (the last closed bucket)
	Last        float64 // the last closed bucket's value, raw units
	Model       ModelInfo
	Levels      []float64 // interval levels in percent
	Z           []float64 // standard normal quantile of each level's upper end
	// Calibrated says that the bands are m ± Mult·sd on the model scale,
	// Mult[(h−1)·L + l] the calibrator's threshold at horizon h and level
	// l (calibrate.Calibrator.Thresholds); otherwise they are m ± Z·sd.
	Calibrated bool
	Mult       []float64
	Mean       []float64 // model-scale forecast means, h = 1..horizon
	Variance   []float64 // and variances
	Transform  transform.Transform
	// Taken is what the online check made of the origin's bucket: ""
	// (a normal value), "outlier" or "level_shift"; TakenZ is its
	// standardised one-step error (0 when Taken is "").
	Taken  string
	TakenZ float64

	// Fill's scratch for one point: the median, then the lower and upper
	// end per level, on the model scale (w) and raw (x, ok).
	ptW, ptX []float64
	ptOK     []bool
}

// Origin returns the start of the last closed bucket.
func (m *ModelForecast) Origin() time.Time { return m.TimeAt(0) }

// TimeAt returns the start of the bucket h steps after the origin.
func (m *ModelForecast) TimeAt(h int) time.Time {
	return time.Unix((m.End+int64(h))*m.StepSeconds, 0).UTC()
}

// CopyFrom makes m a copy of src, reusing m's slices.
func (m *ModelForecast) CopyFrom(src *ModelForecast) {
	levels, z, mean, variance, mult := m.Levels, m.Z, m.Mean, m.Variance, m.Mult
	w, x, ok := m.ptW, m.ptX, m.ptOK
	*m = *src
	m.Mult = append(mult[:0], src.Mult...)
	m.Levels = append(levels[:0], src.Levels...)
	m.Z = append(z[:0], src.Z...)
	m.Mean = append(mean[:0], src.Mean...)
	m.Variance = append(variance[:0], src.Variance...)
	m.ptW, m.ptX, m.ptOK = w, x, ok
}

// Fill writes the raw-unit forecast into dst, reusing dst's slices (it
// allocates only when dst is smaller than the forecast).
//
// The band at level l and horizon h is median ± k·sd on the model scale,
// k the calibrated threshold Mult when Calibrated, else the normal
// quantile Z[l]; Point.Scale is k/Z[l] (1 for the model's own bands). The
// median and every band endpoint map through the monotone inverse
// transform, which keeps quantiles; the mean uses the bias-adjusted back-transform. For a counter
// every value is floored at the last closed value (a total never falls).
func (m *ModelForecast) Fill(dst *Forecast) {
	h, nl := len(m.Mean), len(m.Levels)
	dst.Topic, dst.Kind, dst.StepSeconds = m.Topic, m.Kind, m.StepSeconds
	dst.Origin, dst.LastValue, dst.Model = m.Origin(), m.Last, m.Model
	dst.Taken, dst.TakenZ = m.Taken, m.TakenZ
	dst.Calibrated = m.Calibrated && len(m.Mult) == h*nl
	dst.Levels = append(dst.Levels[:0], m.Levels...)
	if cap(dst.Points) < h {
		dst.Points = append(dst.Points[:cap(dst.Points)], make([]Point, h-cap(dst.Points))...)
	}
	dst.Points = dst.Points[:h]
	if n := 1 + 2*nl; len(m.ptW) != n {
		m.ptW, m.ptX, m.ptOK = make([]float64, n), make([]float64, n), make([]bool, n)
	}
	last := m.Last
	counter := m.Kind == "counter"
	inc := m.Transform.Increasing()
	for i := range dst.Points {
		mu, v := m.Mean[i], m.Variance[i]
		sd := math.Sqrt(math.Max(v, 0))
		p := &dst.Points[i]
		if len(p.Lower) != nl {
			p.Lower, p.Upper = make([]Bound, nl), make([]Bound, nl)
		}
		if len(p.Scale) != nl {
			p.Scale = make([]float64, nl)
		}
		p.H = i + 1
		p.Time = m.TimeAt(i + 1)
		m.ptW[0] = mu
		for j, z := range m.Z {
			k := z
			if dst.Calibrated {
				k = m.Mult[i*nl+j]
			}
			p.Scale[j] = k / z
			m.ptW[1+2*j], m.ptW[2+2*j] = mu-k*sd, mu+k*sd
		}
		m.Transform.InverseSlice(m.ptX, m.ptOK, m.ptW) // the median is Inverse(mu)
		p.Median = orNaN(m.ptX[0], m.ptOK[0])
		p.Mean = orNaN(m.Transform.Mean(mu, v))
		for j := range m.Z {
			lo, lok := m.ptX[1+2*j], m.ptOK[1+2*j]
			hi, hok := m.ptX[2+2*j], m.ptOK[2+2*j]
			if !inc {
				lo, lok, hi, hok = hi, hok, lo, lok
			}
			p.Lower[j] = Bound{Value: lo, OK: lok}
			p.Upper[j] = Bound{Value: hi, OK: hok}
		}
		if counter {
			p.Median = math.Max(p.Median, last)
			p.Mean = math.Max(p.Mean, last)
			for j := range p.Lower {
				// An unbounded lower end of a total is bounded by its last value.
				if !p.Lower[j].OK || p.Lower[j].Value < last {
					p.Lower[j] = Bound{Value: last, OK: true}
				}
				if p.Upper[j].OK && p.Upper[j].Value < last {
					p.Upper[j].Value = last
				}
			}
		}
	}
}

// orNaN turns an out-of-domain inverse into NaN, which the encoder
// publishes as null.
func orNaN(x float64, ok bool) float64 {
	if !ok {
		return math.NaN()
	}
	return x
}

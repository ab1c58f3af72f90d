package daemon

import (
	"forewarn/engine/series"
)

// Entry is a read-only view of one live series, valid only inside the
// function passed to Inspect.
type Entry struct{ e *entry }

// Series returns the series. Callers must not change it.
func (v *Entry) Series() *series.Series { return v.e.s }

// Status is "warming_up", "fitted" or "refitting".
func (v *Entry) Status() string {
	if v.e.busy {
		return "refitting"
	}
	return v.e.s.Status()
}

// Rejects counts observations of this series that were not accepted.
func (v *Entry) Rejects() uint64 { return v.e.rejects }

// Refits returns the bucket indices of recent refits (oldest first).
func (v *Entry) Refits() []int64 { return v.e.refits }

// Rules returns the names, thresholds and directions of the alert rules
// that apply to the series.
func (v *Entry) Rules() []RuleView {
	out := make([]RuleView, 0, len(v.e.rules))
	for _, r := range v.e.rules {
		out = append(out, RuleView{Name: r.Name, Threshold: r.Threshold, Above: r.Above})
	}
	return out
}

// RuleView describes one alert rule on one series.
type RuleView struct {
	Name      string
	Threshold float64
	Above     bool
}

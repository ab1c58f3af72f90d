package stream

import (
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"forewarn/config"
)

// The payload limits a zero Limits stands for are the configuration's
// defaults (config.DefaultLimits, documented per field in config.Limits
// and in the README), so that ParsePayload and the daemon agree on what a
// default bounds. Checked field by field and by what ParsePayload does
// just inside and just outside each bound.
func TestDefaultLimitsAreTheConfigs(t *testing.T) {
	c := config.Default().Limits
	d := DefaultLimits()
	for _, f := range []struct {
		name      string
		got, want any
	}{
		{"MaxPayload", d.MaxPayload, c.MaxPayloadBytes},
		{"MaxBatch", d.MaxBatch, c.MaxBatch},
		{"MaxFuture", d.MaxFuture, c.MaxFuture},
		{"MaxPast", d.MaxPast, c.MaxPast},
	} {
		if f.got != f.want {
			t.Errorf("stream default %s = %v, config default %v", f.name, f.got, f.want)
		}
	}
	if LimitsOf(c) != d {
		t.Errorf("LimitsOf(config defaults) = %+v, DefaultLimits = %+v", LimitsOf(c), d)
	}

	parse := func(p string) error {
		_, err := ParsePayload([]byte(p), arrival, Limits{}, nil)
		return err
	}
	obsAt := func(t time.Time) string { return fmt.Sprintf(`{"time": %d, "value": 1}`, t.Unix()) }
	wantCode := func(what string, err error, code string) {
		t.Helper()
		var rj *Reject
		switch {
		case code == "" && err != nil:
			t.Errorf("%s: %v, want accepted", what, err)
		case code != "" && (!errors.As(err, &rj) || rj.Code != code):
			t.Errorf("%s: %v, want code %s", what, err, code)
		}
	}
	wantCode("time MaxFuture ahead", parse(obsAt(arrival.Add(c.MaxFuture))), "")
	wantCode("time MaxFuture+1s ahead", parse(obsAt(arrival.Add(c.MaxFuture+time.Second))), CodeBadTime)
	wantCode("time MaxPast behind", parse(obsAt(arrival.Add(-c.MaxPast))), "")
	wantCode("time MaxPast+1s behind", parse(obsAt(arrival.Add(-c.MaxPast-time.Second))), CodeBadTime)
	pad := func(n int) string { // a valid payload of exactly n bytes
		p := `{"value": 1}`
		return p + strings.Repeat(" ", n-len(p))
	}
	wantCode("payload of MaxPayloadBytes", parse(pad(c.MaxPayloadBytes)), "")
	wantCode("payload of MaxPayloadBytes+1", parse(pad(c.MaxPayloadBytes+1)), CodeTooLarge)
	batch := func(n int) string {
		return "[" + strings.TrimSuffix(strings.Repeat(`{"value": 1},`, n), ",") + "]"
	}
	wantCode("array of MaxBatch", parse(batch(c.MaxBatch)), "")
	wantCode("array of MaxBatch+1", parse(batch(c.MaxBatch+1)), CodeTooLarge)
}

package config

import (
	"crypto/sha256"
	"encoding/hex"
	"slices"
	"strconv"
	"strings"
)

// fingerprintVersion names the canonical encoding; change it if the
// encoding changes.
const fingerprintVersion = "forewarn-series-v1"

// Fingerprint returns a stable hash of the settings that change the
// maths of a series: kind, step, horizon, levels, window, min_points,
// refit_every, seasons, model, constant, transform, close_after and
// calibrate. Match
// and Line do not enter it. Zero fields count as their defaults, levels
// are compared as a sorted set, a cycle by its number of steps and fixed
// orders in the form WithDefaults writes, so equal settings give equal
// fingerprints however they were written. The state store keeps it with
// each series to notice a change of configuration.
//
// It is the lower-case hex SHA-256 of the canonical encoding
//
//	forewarn-series-v1\nkind=K\nstep=S\nhorizon=H\nlevels=L1,L2,…\nwindow=W\n
//	min_points=M\nrefit_every=R\n[period=P\n]model=MODEL\n[constant=C\n]transform=T\n
//	close_after=C\n[calibrate=false\n]
//
// where K is gauge or counter: an entry of kind auto counts as gauge, the
// kind its series have unless their first message names another (the
// daemon fingerprints such a series with the kind it took). P is the first cycle of seasons in steps (Period), present only
// when there is one, and the constant line only when the constant is not
// auto, and the calibrate line only when calibrate is false: so
// fingerprints from before those keys existed stay valid
// (period: P then meant what seasons: [P] means now). Durations are in
// nanoseconds and levels in the shortest decimal form that reads back as
// the same float64.
//
// References:
//   - NIST FIPS 180-4, Secure Hash Standard (2015), §6.2 (SHA-256).
func (s *Series) Fingerprint() string {
	c := *s
	c.Levels = slices.Clone(s.Levels)
	c.fillDefaults()
	var b strings.Builder
	b.WriteString(fingerprintVersion)
	b.WriteByte('\n')
	field := func(k, v string) {
		b.WriteString(k)
		b.WriteByte('=')
		b.WriteString(v)
		b.WriteByte('\n')
	}
	kind := c.Kind
	if kind == "auto" {
		kind = "gauge"
	}
	field("kind", kind)
	field("step", strconv.FormatInt(int64(c.Step), 10))
	field("horizon", strconv.Itoa(c.Horizon))
	lv := make([]string, len(c.Levels))
	for i, l := range c.Levels {
		lv[i] = strconv.FormatFloat(l, 'g', -1, 64)
	}
	field("levels", strings.Join(lv, ","))
	field("window", strconv.Itoa(c.Window))
	field("min_points", strconv.Itoa(c.MinPoints))
	field("refit_every", strconv.Itoa(c.RefitEvery))
	if per := c.Period(); per != 0 { // only when set, so that older fingerprints stay valid
		field("period", strconv.Itoa(per))
	}
	field("model", c.Model)
	if c.Constant != "auto" { // likewise
		field("constant", c.Constant)
	}
	field("transform", c.Transform)
	field("close_after", strconv.FormatInt(int64(c.CloseAfter), 10))
	if !c.Calibrated() { // only when off, so that fingerprints from before the key stay valid
		field("calibrate", "false")
	}
	if !c.Robust() { // likewise
		field("outliers", "false")
	}
	if per := c.Period(); len(c.Seasons) > 1 || len(c.Seasons) == 1 && per == 0 {
		// several cycles, or one that is not a whole number of steps
		// (with one whole cycle, period above keeps older fingerprints)
		cs := make([]string, len(c.Seasons))
		for i, sec := range c.CycleSeconds() {
			cs[i] = strconv.FormatFloat(sec, 'g', -1, 64)
		}
		field("seasons", strings.Join(cs, ","))
	}
	sum := sha256.Sum256([]byte(b.String()))
	return hex.EncodeToString(sum[:])
}

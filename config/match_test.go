package config

import (
	"errors"
	"strings"
	"testing"

	"github.com/nats-io/nats-server/v2/server"
)

func TestMatchSubjectTable(t *testing.T) {
	cases := []struct {
		pattern, topic string
		want           bool
	}{
		{">", "a", true},
		{">", "a.b.c", true},
		{">", "", false},
		{"*", "a", true},
		{"*", "a.b", false},
		{"*", "", false},
		{"a.*", "a.b", true},
		{"a.*", "a", false},
		{"a.*", "a.b.c", false},
		{"a.>", "a", false},
		{"a.>", "a.b", true},
		{"a.>", "a.b.c", true},
		{"a.>", "ab.c", false},
		{"*.b.>", "x.b.y", true},
		{"*.b.>", "x.c.y", false},
		{"storage.*.used_bytes", "storage.vol1.used_bytes", true},
		{"storage.*.used_bytes", "storage.vol1.free_bytes", false},
		{"storage.*.used_bytes", "storage.a.b.used_bytes", false},
		{"shop.orders", "shop.orders", true},
		{"shop.orders", "shop.order", false},
		{"shop.orders", "shop.orders.eu", false},
		{"a.*.c", "a..c", false}, // an empty token is never a match for "*"
	}
	for _, c := range cases {
		if got := MatchSubject(c.pattern, c.topic); got != c.want {
			t.Errorf("MatchSubject(%q, %q) = %v, want %v", c.pattern, c.topic, got, c.want)
		}
	}
}

// join makes every string of 1..maxLen tokens from alphabet.
func allSubjects(alphabet []string, maxLen int) []string {
	var out []string
	level := []string{""}
	for n := 1; n <= maxLen; n++ {
		var next []string
		for _, prefix := range level {
			for _, tok := range alphabet {
				s := tok
				if n > 1 {
					s = prefix + "." + tok
				}
				next = append(next, s)
			}
		}
		out = append(out, next...)
		level = next
	}
	return out
}

// The bus's own matching rules are the reference: nats-server v2.15.2
// (server/sublist.go: SubjectMatchesFilter, SubjectsCollide,
// IsValidSubject), compared exhaustively over short subjects.
func TestMatchAgreesWithBusServer(t *testing.T) {
	patterns := allSubjects([]string{"a", "b", "*", ">"}, 4)
	var valid []string
	for _, p := range patterns {
		if ValidPattern(p) == nil {
			valid = append(valid, p)
		}
	}
	topics := allSubjects([]string{"a", "b", "c"}, 5)
	for _, p := range valid {
		for _, s := range topics {
			if got, want := MatchSubject(p, s), server.SubjectMatchesFilter(s, p); got != want {
				t.Fatalf("MatchSubject(%q, %q) = %v; nats-server SubjectMatchesFilter says %v", p, s, got, want)
			}
		}
	}
	for _, a := range valid {
		for _, b := range valid {
			if got, want := patternsOverlap(a, b), server.SubjectsCollide(a, b); got != want {
				t.Fatalf("patternsOverlap(%q, %q) = %v; nats-server SubjectsCollide says %v", a, b, got, want)
			}
		}
	}
	// Validity: over tokens the bus treats the same way (no wildcard
	// characters inside a longer token, where forewarn is stricter).
	for _, p := range allSubjects([]string{"a", "*", ">", ""}, 4) {
		if got, want := ValidPattern(p) == nil, server.IsValidSubject(p); got != want {
			t.Errorf("ValidPattern(%q) valid = %v; nats-server IsValidSubject says %v", p, got, want)
		}
	}
}

// patternCovers(a, b) must mean: every topic matching b matches a.
// Checked by brute force over short topics.
func TestPatternCovers(t *testing.T) {
	patterns := allSubjects([]string{"a", "*", ">"}, 3)
	topics := allSubjects([]string{"a", "b"}, 5)
	for _, a := range patterns {
		for _, b := range patterns {
			if ValidPattern(a) != nil || ValidPattern(b) != nil {
				continue
			}
			want := true
			for _, s := range topics {
				if MatchSubject(b, s) && !MatchSubject(a, s) {
					want = false
					break
				}
			}
			// Topics of up to 5 tokens are enough: patterns have at most 3.
			if got := patternCovers(a, b); got != want {
				t.Errorf("patternCovers(%q, %q) = %v, brute force %v", a, b, got, want)
			}
		}
	}
}

func TestValidTopic(t *testing.T) {
	long := strings.Repeat("x", MaxTopicLen+1)
	many := strings.Repeat("a.", MaxTopicTokens) + "a"
	cases := []struct {
		topic, why string // why is "" for a valid topic
	}{
		{"shop.orders", ""},
		{"storage.vol-1.used_bytes", ""},
		{"ünïcode.ok", ""},
		{strings.Repeat("a.", MaxTopicTokens-1) + "a", ""},
		{"", "empty"},
		{"a..b", "token 2 is empty"},
		{".a", "token 1 is empty"},
		{"a.", "token 2 is empty"},
		{"a.*", "wildcard"},
		{"a.>", "wildcard"},
		{"a.b>c", "wildcard"},
		{"a b", "white space"},
		{"a\tb", "white space"},
		{"a\x00b", "non-printable"},
		{"a\u200bb", "non-printable"},
		{"a\xffb", "UTF-8"},
		{long, "more than 256"},
		{many, "more than 16 tokens"},
	}
	for _, c := range cases {
		err := ValidTopic(c.topic)
		if c.why == "" {
			if err != nil {
				t.Errorf("ValidTopic(%q) = %v, want nil", c.topic, err)
			}
			continue
		}
		if !errors.Is(err, ErrBadTopic) || !strings.Contains(err.Error(), c.why) {
			t.Errorf("ValidTopic(%q) = %v, want ErrBadTopic naming %q", c.topic, err, c.why)
		}
	}
	if err := ValidPattern("a.b*"); !errors.Is(err, ErrBadPattern) {
		t.Errorf("ValidPattern(a.b*) = %v", err)
	}
}

func TestTopicOf(t *testing.T) {
	c := Default()
	c.Intake.Subjects = []string{"metrics.>", "legacy.*.gauge", "app.prod.>"}
	if got := c.Prefixes(); strings.Join(got, " ") != "metrics. legacy. app.prod." {
		t.Errorf("Prefixes() = %q", got)
	}
	cases := []struct {
		subject, topic string
		ok             bool
	}{
		{"metrics.shop.orders", "shop.orders", true},
		{"metrics.x", "x", true},
		{"metrics", "", false},
		{"legacy.host1.gauge", "host1.gauge", true},
		{"legacy.host1.counter", "", false},
		{"app.prod.api.latency", "api.latency", true},
		{"forewarn.forecast.x", "", false},
	}
	for _, tc := range cases {
		topic, ok := c.TopicOf(tc.subject)
		if topic != tc.topic || ok != tc.ok {
			t.Errorf("TopicOf(%q) = %q, %v; want %q, %v", tc.subject, topic, ok, tc.topic, tc.ok)
		}
	}
}

func TestSeriesForAndAlertsFor(t *testing.T) {
	c, err := Load("testdata/full.yaml")
	if err != nil {
		t.Fatal(err)
	}
	for topic, want := range map[string]string{
		"shop.eu.orders":        "shop.*.orders",
		"shop.eu.refunds":       ">",
		"storage.v1.used_bytes": "storage.>",
	} {
		s, ok := c.SeriesFor(topic)
		if !ok || s.Match != want {
			t.Errorf("SeriesFor(%q) = %v, %v; want match %q", topic, s, ok, want)
		}
	}
	c.Series = c.Series[:2]
	if s, ok := c.SeriesFor("cpu.load"); ok {
		t.Errorf("SeriesFor(cpu.load) = %+v without a catch-all", s)
	}
	if a := c.AlertsFor("storage.v1.used_bytes"); len(a) != 1 || a[0].Name != "disk-nearly-full" {
		t.Errorf("AlertsFor(storage.v1.used_bytes) = %+v", a)
	}
	if a := c.AlertsFor("shop.eu.orders"); len(a) != 1 || a[0].Name != "orders_stalled" {
		t.Errorf("AlertsFor(shop.eu.orders) = %+v", a)
	}
	if a := c.AlertsFor("storage.v1.free_bytes"); a != nil {
		t.Errorf("AlertsFor(storage.v1.free_bytes) = %+v", a)
	}
}

// The per-message lookups do not allocate (STYLE.md §10).
func TestMatchDoesNotAllocate(t *testing.T) {
	c := Default()
	c.Intake.Subjects = []string{"legacy.*.gauge", "metrics.>"}
	var sink bool
	allocs := testing.AllocsPerRun(100, func() {
		_, ok := c.TopicOf("metrics.shop.eu.orders")
		_, ok2 := c.SeriesFor("shop.eu.orders")
		sink = ok && ok2 && MatchSubject("storage.*.used_bytes", "storage.v1.used_bytes")
	})
	if allocs != 0 || !sink {
		t.Errorf("TopicOf/SeriesFor/MatchSubject: %v allocations a run (ok %v)", allocs, sink)
	}
}

func BenchmarkMatchSubject(b *testing.B) {
	b.ReportAllocs()
	for b.Loop() {
		MatchSubject("storage.*.used_bytes", "storage.vol-17.used_bytes")
	}
}

func BenchmarkTopicOf(b *testing.B) {
	c := Default()
	b.ReportAllocs()
	for b.Loop() {
		c.TopicOf("metrics.shop.eu.orders")
	}
}

func BenchmarkValidTopic(b *testing.B) {
	b.ReportAllocs()
	for b.Loop() {
		_ = ValidTopic("storage.vol-17.used_bytes")
	}
}

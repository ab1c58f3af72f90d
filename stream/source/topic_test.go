package source

import (
	"errors"
	"testing"
	"unicode/utf8"

	"forewarn/config"
)

// The documented mapping on hand-worked examples (doc.go): the safe
// alphabet passes through, every other byte is ~XX, "" is "~".
func TestTokenExamples(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"node_cpu_seconds_total", "node_cpu_seconds_total"},
		{"a:b-c_D9", "a:b-c_D9"},
		{"/var/lib", "~2Fvar~2Flib"},
		{"a.b", "a~2Eb"},
		{"*", "~2A"},
		{">", "~3E"},
		{"two words", "two~20words"},
		{"tab\there", "tab~09here"},
		{"~", "~7E"},
		{"", "~"},
		{"é", "~C3~A9"}, // U+00E9 is C3 A9 in UTF-8 (RFC 3629)
		{"\x00", "~00"},
	} {
		if got := Token(c.in); got != c.want {
			t.Errorf("Token(%q) = %q, want %q", c.in, got, c.want)
		}
		if back, err := DecodeToken(c.want); err != nil || back != c.in {
			t.Errorf("DecodeToken(%q) = %q, %v; want %q", c.want, back, err, c.in)
		}
	}
}

func TestDecodeTokenRefuses(t *testing.T) {
	for _, tok := range []string{"", "a.b", "~2", "~zz", "~2f", "~41", "a b", "a*", "é"} {
		if s, err := DecodeToken(tok); !errors.Is(err, ErrTopic) {
			t.Errorf("DecodeToken(%q) = %q, %v; want ErrTopic", tok, s, err)
		}
	}
}

func TestTopicExamples(t *testing.T) {
	ls := []Label{{"mode", "idle"}, {"cpu", "0"}}
	got := string(AppendTopic(nil, "host1", "node_cpu_seconds_total", ls))
	if want := "host1.node_cpu_seconds_total.0.idle"; got != want { // values in label-name order: cpu, mode
		t.Errorf("topic %q, want %q", got, want)
	}
	name, vals, err := ParseTopic(got, "host1")
	if err != nil || name != "node_cpu_seconds_total" || len(vals) != 2 || vals[0] != "0" || vals[1] != "idle" {
		t.Errorf("ParseTopic = %q %q %v", name, vals, err)
	}
	if got := string(AppendTopic(nil, "", "up", nil)); got != "up" {
		t.Errorf("no prefix, no labels: %q", got)
	}
	if _, _, err := ParseTopic("other.up", "host1"); !errors.Is(err, ErrTopic) {
		t.Errorf("ParseTopic under another prefix: %v", err)
	}
}

// Property: for any metric name and label values, the topic is a valid
// bus topic (when short enough) and ParseTopic gives back exactly the name
// and the values in label-name order.
func FuzzTopicRoundTrip(f *testing.F) {
	f.Add("node_cpu_seconds_total", "0", "idle", "")
	f.Add("a.b*c>d", "", "x y", "~7E")
	f.Add("é", "\x00\n", "~", ".")
	f.Fuzz(func(t *testing.T, name, v1, v2, v3 string) {
		if name == "" {
			return // a sample always has a name
		}
		ls := []Label{{"c", v3}, {"a", v1}, {"b", v2}}
		topic := string(AppendTopic(nil, "p.q", name, ls))
		for i := 0; i < len(topic); i++ {
			if b := topic[i]; !safe(b) && b != '.' && b != '~' {
				t.Fatalf("topic %q has byte %q outside the alphabet", topic, b)
			}
		}
		if len(topic) <= config.MaxTopicLen && utf8.ValidString(topic) {
			if err := config.ValidTopic(topic); err != nil {
				t.Fatalf("topic %q: %v", topic, err)
			}
		}
		gotName, vals, err := ParseTopic(topic, "p.q")
		if err != nil {
			t.Fatalf("ParseTopic(%q): %v", topic, err)
		}
		if gotName != name || len(vals) != 3 || vals[0] != v1 || vals[1] != v2 || vals[2] != v3 {
			t.Fatalf("round trip of %q %q %q %q gave %q %q", name, v1, v2, v3, gotName, vals)
		}
	})
}

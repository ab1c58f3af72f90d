package config

import (
	"os"
	"reflect"
	"strings"
	"testing"
)

// The README's configuration block lists "all keys and their defaults":
// read as a file without its example alert rules, it gives Default, so the
// documented defaults and the code's cannot drift apart.
func TestReadmeDefaultsAreDefault(t *testing.T) {
	b, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	_, rest, ok := strings.Cut(string(b), "\n## Configuration\n")
	if ok {
		_, rest, ok = strings.Cut(rest, "```yaml\n")
	}
	block, _, ok2 := strings.Cut(rest, "```")
	if !ok || !ok2 {
		t.Fatal("README.md has no ```yaml block under ## Configuration")
	}
	block, _, ok = strings.Cut(block, "\nalerts:")
	if !ok {
		t.Fatal("README.md configuration block has no alerts: key")
	}
	got, err := Parse([]byte(block), "README.md")
	if err != nil {
		t.Fatalf("README.md configuration block: %v", err)
	}
	got.pos, got.file = nil, "" // where the values were, not what they are
	for i := range got.Series {
		got.Series[i].Line = 0
		if len(got.Series[i].Seasons) == 0 {
			got.Series[i].Seasons = nil // "seasons: []" and no key mean the same
		}
	}
	if len(got.Alerts) == 0 {
		got.Alerts = nil
	}
	if len(got.Sources) == 0 {
		got.Sources = nil // "sources: []" and no key mean the same
	}
	want := Default().WithDefaults()
	for i := range want.Series {
		if len(want.Series[i].Seasons) == 0 {
			want.Series[i].Seasons = nil
		}
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("README.md defaults differ from Default():\nREADME  %+v\nDefault %+v", got, want)
	}
}

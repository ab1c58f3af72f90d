package source

import (
	"math"
	"net/http"
	"slices"
	"strings"
	"testing"
)

// Exposition edge cases, each checked against the clause of the
// OpenMetrics 1.0 specification (OpenMetrics.md, November 2020) named in
// the case. "sample" lists the samples Parse must give as
// name{topic-token-of-labels}=value[c] (c: counter by TYPE); "err" a
// fragment of the error for a response that must be refused whole.
func TestConformance(t *testing.T) {
	om := http.Header{"Content-Type": {"application/openmetrics-text; version=1.0.0; charset=utf-8"}}
	text := http.Header{"Content-Type": {"text/plain; version=0.0.4"}}
	cases := []struct {
		name, clause string
		h            http.Header
		body         string
		want         []string
		err          string
	}{
		{"escaped label value", "Text format, Escaping: line feed as \\n, double quote as \\\", backslash as \\\\",
			om, "# TYPE foo gauge\nfoo{a=\"x\\\"y\\\\z\\nw\"} 1\n# EOF\n",
			[]string{"foo.x~22y~5Cz~0Aw=1"}, ""},
		{"+Inf, -Inf and NaN samples", "Data Model, Values: NaN, +Inf and -Inf MUST be supported",
			om, "# TYPE a gauge\na +Inf\n# TYPE b gauge\nb -Inf\n# TYPE c gauge\nc NaN\n# EOF\n",
			[]string{"a=+Inf", "b=-Inf", "c=NaN"}, ""},
		{"sample with a timestamp", "Data Model, Timestamps; Text format, Metric types, Gauge (foo 17.0 1520879607.789)",
			om, "# TYPE foo gauge\nfoo 17.0 1520879607.789\n# EOF\n",
			[]string{"foo=17"}, ""},
		{"malformed timestamp", "Text format, ABNF: timestamp = realnumber",
			om, "# TYPE foo gauge\nfoo 17.0 yesterday\n# EOF\n", nil, "line 2"},
		{"missing TYPE", "Text format, MetricFamily metadata: if no TYPE is exposed, the MetricFamily MUST be of type Unknown",
			om, "foo_total 3\nbar 2\n# EOF\n",
			[]string{"foo_total=3", "bar=2"}, ""}, // unknown: a gauge, even with a _total name
		{"counter by TYPE", "Text format, Metric types, Counter: the Total sample MUST have the suffix _total",
			om, "# TYPE foo counter\nfoo_total 17.0\nfoo_created 1520430000.123\n# EOF\n",
			[]string{"foo_total=17c"}, ""},
		{"counter without _total", "Text format, Metric types, Counter",
			om, "# TYPE foo counter\nfoo 17.0\n# EOF\n", nil, "suffix"},
		{"duplicate series", "Data Model, MetricFamily: every Metric within a MetricFamily MUST have a unique LabelSet (the parser passes both; the source publishes the last, TestDuplicateLastWins)",
			om, "# TYPE foo gauge\nfoo{a=\"1\"} 1\nfoo{a=\"1\"} 2\n# EOF\n",
			[]string{"foo.1=1", "foo.1=2"}, ""},
		{"no # EOF", "Text format, Overall Structure: expositions MUST end with EOF",
			om, "# TYPE foo gauge\nfoo 1\n", nil, "does not end with # EOF"},
		{"data after # EOF", "Text format, ABNF: exposition = metricset HASH SP eof [ LF ]",
			om, "# TYPE foo gauge\nfoo 1\n# EOF\nbar 2\n", nil, "after # EOF"},
		{"interleaved families", "Text format, MetricFamily: MetricFamilies MUST NOT be interleaved; Data transmission: partial or invalid expositions MUST be considered erroneous in their entirety",
			om, "# TYPE a gauge\na 1\n# TYPE b gauge\nb 1\n# TYPE a gauge\na 2\n# EOF\n", nil, "line 5"},
		{"empty label value", "Data Model, Label: empty label values SHOULD be treated as if the label was not present",
			om, "# TYPE foo gauge\nfoo{a=\"\",b=\"x\"} 1\n# EOF\n",
			[]string{"foo.x=1"}, ""},
		{"histogram samples", "Data Model, Histogram: buckets are cumulative, one with threshold +Inf; Sum and buckets are counters",
			om, "# TYPE h histogram\nh_bucket{le=\"1.0\"} 1\nh_bucket{le=\"+Inf\"} 2\nh_sum 3\nh_count 2\n# EOF\n",
			[]string{"h_bucket.1=1c", "h_bucket.~2BInf=2c", "h_sum=3c", "h_count=2c"}, ""},
		{"text format 0.0.4 without # EOF", "OpenMetrics 1.0 Introduction: the Prometheus exposition format 0.0.4 it extends (no EOF line there)",
			text, "# TYPE foo_total counter\nfoo_total 3\nup 1\n",
			[]string{"foo_total=3c", "up=1"}, ""},
		{"garbage", "Data transmission: partial or invalid expositions MUST be considered erroneous in their entirety",
			text, "up 1\n<html>oops</html>\n", nil, "line 2"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := Parse(nil, []byte(c.body), c.h, nil)
			if c.err != "" {
				if err == nil || !strings.Contains(err.Error(), c.err) {
					t.Fatalf("%s: error %v, want one containing %q", c.clause, err, c.err)
				}
				if len(got) != 0 {
					t.Fatalf("%s: an erroneous exposition gave samples %v", c.clause, got)
				}
				return
			}
			if err != nil {
				t.Fatalf("%s: %v", c.clause, err)
			}
			var rendered []string
			for _, s := range got {
				r := string(AppendTopic(nil, "", s.Name, s.Labels)) + "=" + fmtValue(s.Value)
				if s.Counter {
					r += "c"
				}
				rendered = append(rendered, r)
			}
			// The order of families is free (OpenMetrics 1.0, MetricSet:
			// "There is no specific ordering of MetricFamilies").
			slices.Sort(rendered)
			want := slices.Sorted(slices.Values(c.want))
			if strings.Join(rendered, " ") != strings.Join(want, " ") {
				t.Errorf("%s:\n got %v\nwant %v", c.clause, rendered, want)
			}
		})
	}
}

func fmtValue(v float64) string {
	switch {
	case math.IsInf(v, -1):
		return "-Inf"
	case math.IsNaN(v):
		return "NaN"
	}
	return bound(v)
}

// Select keeps samples by their name or their family's name.
func TestSelect(t *testing.T) {
	h := http.Header{"Content-Type": {"application/openmetrics-text; version=1.0.0"}}
	body := "# TYPE h histogram\nh_bucket{le=\"+Inf\"} 2\nh_sum 3\nh_count 2\n# TYPE g gauge\ng 1\n# TYPE c counter\nc_total 4\n# EOF\n"
	keep := func(names ...string) func(string) bool {
		return func(n string) bool {
			for _, m := range names {
				if n == m {
					return true
				}
			}
			return false
		}
	}
	for _, c := range []struct {
		sel  []string
		want int
	}{{[]string{"h"}, 3}, {[]string{"h_sum"}, 1}, {[]string{"c_total", "g"}, 2}, {[]string{"nothing"}, 0}} {
		got, err := Parse(nil, []byte(body), h, keep(c.sel...))
		if err != nil || len(got) != c.want {
			t.Errorf("select %v: %d samples (%v), want %d", c.sel, len(got), err, c.want)
		}
	}
}

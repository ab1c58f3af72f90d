package source

import (
	"bytes"
	"fmt"
	"net/http"
	"testing"
)

// exposition writes n gauge series with two labels, in OpenMetrics 1.0.0
// (om) or the text format 0.0.4, about the size of a host exporter's page
// for n = 1000.
func exposition(n int, om bool) []byte {
	var b bytes.Buffer
	b.WriteString("# TYPE host_cpu_seconds counter\n")
	if !om {
		b.Reset()
		b.WriteString("# TYPE host_cpu_seconds_total counter\n")
	}
	for i := range n {
		fmt.Fprintf(&b, "host_cpu_seconds_total{cpu=\"%d\",mode=\"idle\"} %d.25\n", i, 1000+i)
	}
	if om {
		b.WriteString("# EOF\n")
	}
	return b.Bytes()
}

// BenchmarkParse reports what a scrape costs to parse per sample with each
// format's decoder (github.com/prometheus/common/expfmt).
//
//	go test -run '^$' -bench Parse -benchmem ./stream/source
func BenchmarkParse(b *testing.B) {
	for _, c := range []struct {
		name string
		om   bool
		ct   string
	}{{"openmetrics", true, omType}, {"text004", false, "text/plain; version=0.0.4"}} {
		body := exposition(1000, c.om)
		h := http.Header{"Content-Type": {c.ct}}
		b.Run(c.name, func(b *testing.B) {
			b.ReportAllocs()
			var dst []Sample
			for b.Loop() {
				var err error
				if dst, err = Parse(dst[:0], body, h, nil); err != nil || len(dst) != 1000 {
					b.Fatal(err, len(dst))
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/1000, "ns/sample")
		})
	}
}

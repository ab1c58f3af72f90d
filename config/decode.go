package config

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"
	"time"

	"gopkg.in/yaml.v3"
)

// Decoding bounds, so that no file can make Parse work without end.
const (
	maxProblems = 200    // problems listed; the rest are counted in one line
	maxAliases  = 10000  // alias uses followed in one document
	maxNodes    = 100000 // values and list items walked in one document
	maxStored   = 1000   // problems kept while decoding; the rest are counted
)

// Load reads the YAML file at path and returns the configuration, with
// defaults filled in and validated. A problem with the contents is an
// *Errors naming path; a read failure wraps the os error.
func Load(path string) (*Config, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("config: read %s: %w", path, err)
	}
	return Parse(data, path)
}

// Parse decodes YAML data and returns the configuration, with defaults
// filled in (see WithDefaults) and validated (see Validate). name is used
// in messages, usually the file name. Keys absent from data keep their
// Default values; a key that is not known is an error; every problem,
// from decoding and from validation, is reported in one *Errors.
//
// Durations are strings with units ("90s", "1h30m"); a bare number is
// refused, except 0. Sizes (intake.max_bytes, limits.max_payload_bytes)
// are whole numbers of bytes or strings with a unit: B, KB, MB, GB, TB
// (powers of 1000) or KiB, MiB, GiB, TiB (powers of 1024). Anchors and
// aliases are followed; merge keys ("<<") are not supported. Only one
// YAML document is allowed; an empty one gives Default().
func Parse(data []byte, name string) (*Config, error) {
	d := &decoder{pos: map[string]position{}, failed: map[string]bool{}}
	cfg := Default()
	if root := d.parse(data); root != nil {
		d.top(root, cfg)
	}
	cfg.pos, cfg.file = d.pos, name
	out := cfg.WithDefaults()
	probs := d.probs
	if d.fatal != nil && len(probs) == 0 {
		probs = []Problem{*d.fatal}
		d.fatal = nil
	}
	if d.dropped == 0 && !d.exhausted {
		probs = append(probs, out.validate(d.failed)...)
	}
	if len(probs) > 0 {
		e := newErrors(name, probs, d.dropped)
		if d.fatal != nil { // the reason the walk stopped comes first
			e.Problems = append([]Problem{*d.fatal}, e.Problems...)
		}
		return nil, e
	}
	return out, nil
}

// newErrors sorts problems by position (those without one last) and caps
// their number; dropped counts problems already left out.
func newErrors(file string, probs []Problem, dropped int) *Errors {
	sort.SliceStable(probs, func(i, j int) bool {
		a, b := probs[i], probs[j]
		if (a.Line == 0) != (b.Line == 0) {
			return b.Line == 0
		}
		if a.Line != b.Line {
			return a.Line < b.Line
		}
		return a.Column < b.Column
	})
	if more := len(probs) - maxProblems + dropped; more > 0 {
		probs = append(probs[:min(len(probs), maxProblems):maxProblems], Problem{Msg: fmt.Sprintf("and %d more problems", more)})
	}
	return &Errors{File: file, Problems: probs}
}

type decoder struct {
	probs []Problem
	pos   map[string]position // where each decoded value was
	// failed holds the paths whose value, or a value inside it, could
	// not be decoded: the failed path and all its ancestors.
	failed    map[string]bool
	dropped   int // problems not kept, beyond maxStored
	aliases   int // alias uses followed
	nodes     int // nodes walked
	exhausted bool
	fatal     *Problem // why the walk stopped early, if it did
}

// stop ends the walk with a problem that is always listed.
func (d *decoder) stop(n *yaml.Node, path, format string, args ...any) {
	d.exhausted = true
	p := Problem{Path: path, Msg: fmt.Sprintf(format, args...)}
	if n != nil {
		p.Line, p.Column = n.Line, n.Column
	}
	d.fatal = &p
}

func (d *decoder) errorf(n *yaml.Node, path, format string, args ...any) {
	for k := path; k != "" && !d.failed[k]; k = parentPath(k) {
		d.failed[k] = true
	}
	if len(d.probs) >= maxStored {
		d.dropped++
		return
	}
	p := Problem{Path: path, Msg: fmt.Sprintf(format, args...)}
	if n != nil {
		p.Line, p.Column = n.Line, n.Column
	}
	d.probs = append(d.probs, p)
}

var yamlLine = lazyRegexp(`^yaml: line (\d+): (.*)$`)

// parse returns the root node of the single document in data, or nil if
// the document is empty or cannot be parsed (a problem is recorded).
func (d *decoder) parse(data []byte) (root *yaml.Node) {
	defer func() {
		// The YAML library is third-party code; should it ever panic on
		// some input, that input is reported as unreadable, not fatal.
		if r := recover(); r != nil {
			d.probs = append(d.probs, Problem{Msg: fmt.Sprintf("cannot read YAML: %v", r)})
			root = nil
		}
	}()
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var doc yaml.Node
	if err := dec.Decode(&doc); err != nil {
		if !errors.Is(err, io.EOF) {
			d.syntax(err)
		}
		return nil
	}
	var extra yaml.Node
	switch err := dec.Decode(&extra); {
	case errors.Is(err, io.EOF):
	case err != nil:
		d.syntax(err)
	default:
		d.errorf(&extra, "", "a second YAML document (after ---); the configuration is one document")
	}
	if doc.Kind != yaml.DocumentNode || len(doc.Content) == 0 {
		return nil
	}
	return doc.Content[0]
}

func (d *decoder) syntax(err error) {
	msg := err.Error()
	if m := yamlLine().FindStringSubmatch(msg); m != nil {
		line, _ := strconv.Atoi(m[1])
		d.probs = append(d.probs, Problem{Line: line, Msg: "YAML syntax: " + m[2]})
		return
	}
	d.probs = append(d.probs, Problem{Msg: "YAML syntax: " + strings.TrimPrefix(msg, "yaml: ")})
}

// resolve follows an alias to its anchored node. Every node walked passes
// here; past maxNodes it returns nil, which ends the walk.
func (d *decoder) resolve(n *yaml.Node, path string) *yaml.Node {
	if d.exhausted {
		return nil
	}
	if d.nodes++; d.nodes > maxNodes {
		d.stop(n, path, "more than %d values; a configuration is far smaller", maxNodes)
		return nil
	}
	for n != nil && n.Kind == yaml.AliasNode {
		d.aliases++
		if d.aliases > maxAliases {
			d.stop(n, path, "more than %d alias uses; a configuration needs far fewer", maxAliases)
			return nil
		}
		n = n.Alias
	}
	return n
}

func isNull(n *yaml.Node) bool {
	return n == nil || (n.Kind == yaml.ScalarNode && n.ShortTag() == "!!null")
}

func kindName(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		switch n.ShortTag() {
		case "!!int", "!!float":
			return "the number " + n.Value
		case "!!bool":
			return "the boolean " + n.Value
		case "!!null":
			return "nothing"
		}
		return strconv.Quote(clip(n.Value))
	}
	return "something else"
}

// fields maps each known key of a mapping to the function that decodes
// its value, given the value's node and its path.
type fields map[string]func(n *yaml.Node, path string)

// mapping decodes a mapping node key by key. A null node is an empty
// mapping.
func (d *decoder) mapping(n *yaml.Node, path string, fs fields) {
	n = d.resolve(n, path)
	if isNull(n) {
		return
	}
	if n.Kind != yaml.MappingNode {
		d.errorf(n, path, "expected a mapping of keys to values, got %s", kindName(n))
		return
	}
	seen := map[string]bool{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := d.resolve(n.Content[i], path), n.Content[i+1]
		if k == nil {
			continue
		}
		if k.Kind != yaml.ScalarNode {
			d.errorf(k, path, "a key must be a plain word, got %s", kindName(k))
			continue
		}
		child := k.Value
		if path != "" {
			child = path + "." + k.Value
		}
		if k.Value == "<<" {
			d.errorf(k, path, "merge keys (<<) are not supported; write the keys out")
			continue
		}
		if seen[k.Value] {
			d.errorf(k, child, "key given twice")
			continue
		}
		seen[k.Value] = true
		f, ok := fs[k.Value]
		if !ok {
			d.errorf(k, child, "unknown key%s", suggest(k.Value, fs))
			continue
		}
		if rv := d.resolve(v, child); rv != nil {
			d.pos[child] = position{rv.Line, rv.Column}
			f(rv, child)
		}
	}
}

// suggest names the closest known key, or lists them all.
func suggest(key string, fs fields) string {
	names := make([]string, 0, len(fs))
	for k := range fs {
		if !retiredKeys[k] {
			names = append(names, k)
		}
	}
	sort.Strings(names)
	best, bestD := "", 3
	for _, k := range names {
		if dist := editDistance(key, k); dist < bestD {
			best, bestD = k, dist
		}
	}
	if best != "" {
		return fmt.Sprintf("; did you mean %q?", best)
	}
	return "; known keys: " + strings.Join(names, ", ")
}

// editDistance is the Levenshtein distance between a and b, in bytes.
func editDistance(a, b string) int {
	if len(a) > 64 || len(b) > 64 {
		return 1 << 30
	}
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

// scalar returns n if it is a scalar, else records a problem and returns nil.
func (d *decoder) scalar(n *yaml.Node, path, want string) *yaml.Node {
	if n.Kind != yaml.ScalarNode {
		d.errorf(n, path, "expected %s, got %s", want, kindName(n))
		return nil
	}
	return n
}

func (d *decoder) str(dst *string) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		if s := d.scalar(n, path, "a string"); s != nil {
			switch s.ShortTag() {
			case "!!str":
				*dst = s.Value
			case "!!null":
				*dst = ""
			default:
				d.errorf(s, path, "expected a string, got %s; put it in quotes", kindName(s))
			}
		}
	}
}

func (d *decoder) boolean(dst *bool) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		if s := d.scalar(n, path, "true or false"); s != nil {
			if s.ShortTag() != "!!bool" {
				d.errorf(s, path, "expected true or false, got %s", kindName(s))
				return
			}
			if err := s.Decode(dst); err != nil {
				d.errorf(s, path, "expected true or false, got %s", kindName(s))
			}
		}
	}
}

func (d *decoder) integer(dst *int) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		s := d.scalar(n, path, "a whole number")
		if s == nil {
			return
		}
		var v int64
		if s.ShortTag() != "!!int" || s.Decode(&v) != nil || v < math.MinInt32 || v > math.MaxInt32 {
			d.errorf(s, path, "expected a whole number of reasonable size, got %s", kindName(s))
			return
		}
		*dst = int(v)
	}
}

// number decodes a finite number.
func (d *decoder) number(n *yaml.Node, path string) (float64, bool) {
	s := d.scalar(n, path, "a number")
	if s == nil {
		return 0, false
	}
	var v float64
	if tag := s.ShortTag(); (tag != "!!int" && tag != "!!float") || s.Decode(&v) != nil {
		d.errorf(s, path, "expected a number, got %s", kindName(s))
		return 0, false
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		d.errorf(s, path, "must be a finite number, got %s", s.Value)
		return 0, false
	}
	return v, true
}

// renamed refuses a key that an earlier release knew under this name,
// with a problem "was renamed: <hint>", the hint naming the new spelling.
// Unlike a value that cannot be decoded, it leaves the enclosing entry
// whole (only the key's own path counts as failed), so that the entry's
// other problems are reported in the same run.
//
// The hint may hold one %s, which gets the value as written.
func (d *decoder) renamed(hint string) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		if strings.Contains(hint, "%s") {
			v := "..."
			if n.Kind == yaml.ScalarNode {
				v = clip(n.Value)
			}
			hint = fmt.Sprintf(hint, v)
		}
		d.failed[path] = true
		if len(d.probs) >= maxStored {
			d.dropped++
			return
		}
		d.probs = append(d.probs, Problem{Path: path, Msg: "was renamed: " + hint, Line: n.Line, Column: n.Column})
	}
}

func (d *decoder) float(dst *float64) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		if v, ok := d.number(n, path); ok {
			*dst = v
		}
	}
}

func (d *decoder) floatPtr(dst **float64) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		if v, ok := d.number(n, path); ok {
			*dst = &v
		}
	}
}

func (d *decoder) duration(dst *time.Duration) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		s := d.scalar(n, path, `a duration such as "90s" or "1h30m"`)
		if s == nil {
			return
		}
		switch s.ShortTag() {
		case "!!str":
			v, err := time.ParseDuration(s.Value)
			if err != nil {
				d.errorf(s, path, "%q is not a duration; write a number with a unit, such as \"90s\" or \"1h30m\"", clip(s.Value))
				return
			}
			*dst = v
		case "!!int", "!!float":
			if f, err := strconv.ParseFloat(s.Value, 64); err == nil && f == 0 {
				*dst = 0
				return
			}
			d.errorf(s, path, "the bare number %s has no unit; write e.g. \"%ss\" for seconds", s.Value, s.Value)
		default:
			d.errorf(s, path, "expected a duration such as \"90s\" or \"1h30m\", got %s", kindName(s))
		}
	}
}

var sizeRE = lazyRegexp(`^([0-9]+)\s*([KMGT]i?B|B)?$`)

var sizeUnits = map[string]int64{
	"": 1, "B": 1,
	"KB": 1e3, "MB": 1e6, "GB": 1e9, "TB": 1e12,
	"KiB": 1 << 10, "MiB": 1 << 20, "GiB": 1 << 30, "TiB": 1 << 40,
}

// parseSize reads "65536", "64KiB", "1 GB"; ok is false on a bad form or
// a value above 1<<50 bytes.
func parseSize(s string) (int64, bool) {
	m := sizeRE().FindStringSubmatch(strings.TrimSpace(s))
	if m == nil {
		return 0, false
	}
	n, err := strconv.ParseInt(m[1], 10, 64)
	unit := sizeUnits[m[2]]
	if err != nil || n > (1<<50)/unit {
		return 0, false
	}
	return n * unit, true
}

func (d *decoder) size(set func(int64)) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		s := d.scalar(n, path, "a size")
		if s == nil {
			return
		}
		if tag := s.ShortTag(); tag == "!!int" || tag == "!!str" {
			if v, ok := parseSize(s.Value); ok {
				set(v)
				return
			}
		}
		d.errorf(s, path, "expected a size in bytes such as 65536, \"64KiB\" or \"1GB\", got %s", kindName(s))
	}
}

// list decodes a sequence, calling item for each element with its path.
// A null node is an empty list.
func (d *decoder) list(n *yaml.Node, path string, item func(n *yaml.Node, path string)) {
	if isNull(n) {
		return
	}
	if n.Kind != yaml.SequenceNode {
		d.errorf(n, path, "expected a list, got %s", kindName(n))
		return
	}
	for i, e := range n.Content {
		p := fmt.Sprintf("%s[%d]", path, i)
		if e = d.resolve(e, p); e != nil {
			d.pos[p] = position{e.Line, e.Column}
			item(e, p)
		}
	}
}

func (d *decoder) strings(dst *[]string) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		out := []string{}
		d.list(n, path, func(e *yaml.Node, p string) {
			var s string
			d.str(&s)(e, p)
			out = append(out, s)
		})
		*dst = out
	}
}

func (d *decoder) floats(dst *[]float64) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		out := []float64{}
		d.list(n, path, func(e *yaml.Node, p string) {
			if v, ok := d.number(e, p); ok {
				out = append(out, v)
			}
		})
		*dst = out
	}
}

// cycles decodes a list of seasonal cycles (ParseCycle): strings such as
// "1d" or "12h", or whole numbers of steps.
func (d *decoder) cycles(dst *[]Cycle) func(*yaml.Node, string) {
	return func(n *yaml.Node, path string) {
		out := []Cycle{}
		d.list(n, path, func(e *yaml.Node, p string) {
			s := d.scalar(e, p, `a cycle such as "1d" or 12`)
			if s == nil {
				return
			}
			if tag := s.ShortTag(); tag != "!!int" && tag != "!!str" {
				d.errorf(s, p, "expected a cycle such as \"1d\", \"12h\" or a whole number of steps such as 12, got %s", kindName(s))
				return
			}
			c, err := ParseCycle(s.Value)
			if err != nil {
				d.errorf(s, p, "%v", err)
				return
			}
			out = append(out, c)
		})
		*dst = out
	}
}

// retiredKeys are keys kept only to name their replacement (renamed); they
// are never suggested.
var retiredKeys = map[string]bool{"period": true, "resolve_probability": true}

// top decodes the root mapping onto c.
func (d *decoder) top(root *yaml.Node, c *Config) {
	n, in, o, st, h, l, r, lim := &c.NATS, &c.Intake, &c.Output, &c.State, &c.HTTP, &c.Log, &c.Refit, &c.Limits
	d.mapping(root, "", fields{
		"nats": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{
				"url":            d.str(&n.URL),
				"listen":         d.str(&n.Listen),
				"user":           d.str(&n.User),
				"password":       d.str(&n.Password),
				"token":          d.str(&n.Token),
				"nkey_seed_file": d.str(&n.NKeySeedFile),
				"creds_file":     d.str(&n.CredsFile),
				"sync_always":    d.boolean(&n.SyncAlways),
				"tls": func(v *yaml.Node, p string) {
					d.mapping(v, p, fields{
						"ca_file":              d.str(&n.TLS.CAFile),
						"cert_file":            d.str(&n.TLS.CertFile),
						"key_file":             d.str(&n.TLS.KeyFile),
						"server_name":          d.str(&n.TLS.ServerName),
						"insecure_skip_verify": d.boolean(&n.TLS.InsecureSkipVerify),
					})
				},
			})
		},
		"intake": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{
				"subjects":  d.strings(&in.Subjects),
				"durable":   d.boolean(&in.Durable),
				"stream":    d.str(&in.Stream),
				"consumer":  d.str(&in.Consumer),
				"max_age":   d.duration(&in.MaxAge),
				"max_bytes": d.size(func(v int64) { in.MaxBytes = v }),
				"replicas":  d.integer(&in.Replicas),
				"loops":     d.integer(&in.Loops),
			})
		},
		"cluster": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{
				"partitions":     d.integer(&c.Cluster.Partitions),
				"instance":       d.str(&c.Cluster.Instance),
				"lease":          d.duration(&c.Cluster.Lease),
				"snapshot_every": d.duration(&c.Cluster.SnapshotEvery),
			})
		},
		"output": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{"prefix": d.str(&o.Prefix)})
		},
		"state": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{
				"dir":            d.str(&st.Dir),
				"flush_interval": d.duration(&st.FlushInterval),
				"flush_max":      d.integer(&st.FlushMax),
			})
		},
		"http": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{"listen": d.str(&h.Listen)})
		},
		"log": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{"level": d.str(&l.Level), "format": d.str(&l.Format)})
		},
		"refit": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{"workers": d.integer(&r.Workers)})
		},
		"limits": func(v *yaml.Node, p string) {
			d.mapping(v, p, fields{
				"max_series":        d.integer(&lim.MaxSeries),
				"max_payload_bytes": d.size(func(v int64) { lim.MaxPayloadBytes = int(v) }),
				"max_batch":         d.integer(&lim.MaxBatch),
				"max_window":        d.integer(&lim.MaxWindow),
				"max_future":        d.duration(&lim.MaxFuture),
				"max_past":          d.duration(&lim.MaxPast),
			})
		},
		"series": func(v *yaml.Node, p string) {
			c.Series = []Series{}
			d.list(v, p, func(e *yaml.Node, p string) {
				s := Series{Line: e.Line}
				d.mapping(e, p, fields{
					"match":       d.str(&s.Match),
					"kind":        d.str(&s.Kind),
					"step":        d.duration(&s.Step),
					"horizon":     d.integer(&s.Horizon),
					"levels":      d.floats(&s.Levels),
					"window":      d.integer(&s.Window),
					"min_points":  d.integer(&s.MinPoints),
					"refit_every": d.integer(&s.RefitEvery),
					"seasons":     d.cycles(&s.Seasons),
					"model":       d.str(&s.Model),
					"constant":    d.str(&s.Constant),
					"period":      d.renamed(`write seasons: [%s]`),
					"transform":   d.str(&s.Transform),
					"close_after": d.duration(&s.CloseAfter),
					"calibrate": func(n *yaml.Node, p string) {
						var b bool
						if d.boolean(&b)(n, p); n.ShortTag() == "!!bool" {
							s.Calibrate = &b
						}
					},
					"outliers": func(n *yaml.Node, p string) {
						var b bool
						if d.boolean(&b)(n, p); n.ShortTag() == "!!bool" {
							s.Outliers = &b
						}
					},
				})
				c.Series = append(c.Series, s)
			})
		},
		"sources": func(v *yaml.Node, p string) {
			c.Sources = []Source{}
			d.list(v, p, func(e *yaml.Node, p string) {
				s := Source{Line: e.Line}
				d.mapping(e, p, fields{
					"openmetrics":  d.str(&s.OpenMetrics),
					"name":         d.str(&s.Name),
					"every":        d.duration(&s.Every),
					"timeout":      d.duration(&s.Timeout),
					"max_bytes":    d.size(func(v int64) { s.MaxBytes = v }),
					"select":       d.strings(&s.Select),
					"topic_prefix": d.str(&s.TopicPrefix),
					"kind":         d.str(&s.Kind),
				})
				c.Sources = append(c.Sources, s)
			})
		},
		"alerts": func(v *yaml.Node, p string) {
			c.Alerts = []Alert{}
			d.list(v, p, func(e *yaml.Node, p string) {
				a := Alert{Line: e.Line}
				d.mapping(e, p, fields{
					"name":                d.str(&a.Name),
					"match":               d.str(&a.Match),
					"above":               d.floatPtr(&a.Above),
					"below":               d.floatPtr(&a.Below),
					"within":              d.duration(&a.Within),
					"probability":         d.float(&a.Probability),
					"clear_probability":   d.float(&a.ClearProbability),
					"resolve_probability": d.renamed("write clear_probability"),
				})
				c.Alerts = append(c.Alerts, a)
			})
		},
	})
}

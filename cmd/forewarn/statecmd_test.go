package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"forewarn/engine/series"
	"forewarn/state"
)

// stateFixture writes a state file with two series into a new directory.
func stateFixture(t *testing.T) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "data")
	st, err := state.Open(dir, state.NoSync())
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	batch := []*series.Snapshot{
		{
			Topic: "shop.orders", Kind: "counter", StepSeconds: 60, Seq: 19283, Closed: 480,
			Window:    []float64{1830, math.NaN(), 1834},
			Transform: series.TransformSnapshot{Name: "log", Scale: math.Inf(1)},
			Model: &series.ModelSnapshot{Order: [3]int{1, 1, 1}, Seasonal: [3]int{0, 1, 1}, Period: 24, Params: []float64{0.5, -0.25, -0.5},
				Sigma2: 0.0625, NObs: 455, Filter: []float64{1, 2}},
			Alerts: []series.AlertSnapshot{{Rule: "orders-dropping", Raised: true, Since: 28000000, Probability: 0.75}},
		},
		{Topic: "storage.vol1.used_bytes", Kind: "gauge", StepSeconds: 5400, Seq: 7, Closed: 3, Window: []float64{1, 2, 3}},
	}
	if err := st.Save(batch); err != nil {
		t.Fatal(err)
	}
	return dir
}

func runStateArgs(args ...string) (code int, stdout, stderr string) {
	var o, e bytes.Buffer
	code = runState(args, &o, &e)
	return code, o.String(), e.String()
}

func TestStateList(t *testing.T) {
	dir := stateFixture(t)
	for _, args := range [][]string{
		{"list", "--data", dir},
		{"--data", dir, "list"},
		{"-data=" + dir, "list"},
		{"list", "--data=" + dir, "--"},
	} {
		code, out, errOut := runStateArgs(args...)
		if code != exitOK {
			t.Fatalf("%v: exit %d, stderr %s", args, code, errOut)
		}
		lines := strings.Split(strings.TrimSpace(out), "\n")
		if len(lines) != 3 {
			t.Fatalf("%v: %d lines:\n%s", args, len(lines), out)
		}
		for i, want := range [][]string{
			{"TOPIC", "KIND", "STEP", "CLOSED", "WINDOW", "MODEL", "SEQ"},
			{"shop.orders", "counter", "1m", "480", "3", "ARIMA", "1,1,1", "×", "0,1,1", "s=24", "19283"},
			{"storage.vol1.used_bytes", "gauge", "1h30m", "3", "3", "warming", "up", "7"},
		} {
			if got := strings.Fields(lines[i]); strings.Join(got, " ") != strings.Join(want, " ") {
				t.Errorf("%v: line %d = %q, want fields %q", args, i, lines[i], want)
			}
		}
	}
}

func TestStateShow(t *testing.T) {
	dir := stateFixture(t)
	code, out, errOut := runStateArgs("show", "shop.orders", "--data", dir)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var got map[string]any
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatalf("output is not JSON: %v\n%s", err, out)
	}
	if !strings.Contains(out, "\n  \"topic\": \"shop.orders\"") {
		t.Errorf("output is not indented JSON:\n%s", out)
	}
	window := got["window"].([]any)
	if len(window) != 3 || window[0] != 1830.0 || window[1] != nil || window[2] != 1834.0 {
		t.Errorf("window = %v, want [1830 null 1834]", window)
	}
	if tr := got["transform"].(map[string]any); tr["name"] != "log" || tr["scale"] != nil {
		t.Errorf("transform = %v, want name log and scale null (+Inf)", tr)
	}
	model := got["model"].(map[string]any)
	if model["label"] != "ARIMA 1,1,1 × 0,1,1 s=24" || model["constant"] != "none" || model["period"] != 24.0 ||
		fmt.Sprint(model["arima"]) != "[1 1 1]" || fmt.Sprint(model["seasonal_arima"]) != "[0 1 1]" ||
		model["innovation_variance"] != 0.0625 || model["observations_used"] != 455.0 {
		t.Errorf("model = %v", model)
	}
	if a := got["alerts"].([]any)[0].(map[string]any); a["rule"] != "orders-dropping" || a["raised"] != true || a["probability"] != 0.75 {
		t.Errorf("alerts = %v", got["alerts"])
	}
	if got["seq"] != 19283.0 || got["step_seconds"] != 60.0 {
		t.Errorf("seq %v step %v", got["seq"], got["step_seconds"])
	}

	code, out, _ = runStateArgs("--data", dir, "show", "storage.vol1.used_bytes")
	if code != exitOK || !strings.Contains(out, `"model": null`) || !strings.Contains(out, `"alerts": []`) {
		t.Errorf("warming-up series: exit %d\n%s", code, out)
	}

	code, _, errOut = runStateArgs("show", "no.such", "--data", dir)
	if code != exitFailure || !strings.Contains(errOut, `no series "no.such"`) {
		t.Errorf("missing topic: exit %d, stderr %q", code, errOut)
	}
}

func TestStateCheck(t *testing.T) {
	dir := stateFixture(t)
	code, out, errOut := runStateArgs("check", "--data", dir)
	if code != exitOK || !strings.HasPrefix(out, "ok: ") || !strings.Contains(out, "2 series") {
		t.Fatalf("clean file: exit %d, stdout %q, stderr %q", code, out, errOut)
	}

	// Damage two records behind the store's back.
	db, err := bolt.Open(filepath.Join(dir, state.FileName), 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		b := tx.Bucket([]byte("series"))
		if err := b.Put([]byte("broken.one"), []byte("fwsr garbage")); err != nil {
			return err
		}
		v := bytes.Clone(b.Get([]byte("shop.orders")))
		v[40] ^= 0xff
		return b.Put([]byte("shop.orders"), v)
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}

	code, out, errOut = runStateArgs("check", "--data", dir)
	if code != exitFailure {
		t.Fatalf("damaged file: exit %d", code)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 2 || !strings.Contains(out, `"broken.one"`) || !strings.Contains(out, `"shop.orders"`) ||
		!strings.Contains(out, "CRC mismatch") || !strings.Contains(errOut, "2 problem(s)") {
		t.Fatalf("damaged file: stdout\n%s\nstderr %s", out, errOut)
	}

	// list still shows the good series and exits 1 naming the bad ones.
	code, out, errOut = runStateArgs("list", "--data", dir)
	if code != exitFailure || !strings.Contains(out, "storage.vol1.used_bytes") ||
		!strings.Contains(out, "unreadable record") || !strings.Contains(errOut, "2 unreadable") {
		t.Fatalf("list of damaged file: exit %d\n%s\n%s", code, out, errOut)
	}
}

// Records the daemon set aside are listed by check (which still passes:
// they are not damage to the live state) and counted by list.
func TestStateSetAside(t *testing.T) {
	dir := stateFixture(t)
	st, err := state.Open(dir, state.NoSync())
	if err != nil {
		t.Fatal(err)
	}
	at := time.Date(2026, 11, 30, 8, 0, 0, 0, time.UTC)
	if moved, err := st.SetAside("storage.vol1.used_bytes", at); err != nil || !moved {
		t.Fatalf("SetAside: %v, %v", moved, err)
	}
	st.Close()

	code, out, errOut := runStateArgs("check", "--data", dir)
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if code != exitOK || len(lines) != 2 || !strings.Contains(lines[0], "1 series, 1 set aside") ||
		lines[1] != `set aside: "storage.vol1.used_bytes" at 2026-11-30T08:00:00Z, `+
			strconv.Itoa(state.EncodedLen(&series.Snapshot{Topic: "storage.vol1.used_bytes", Kind: "gauge", StepSeconds: 5400, Seq: 7, Closed: 3, Window: []float64{1, 2, 3}}))+
			` bytes: readable (set aside for another kind or step)` {
		t.Fatalf("check: exit %d, stdout\n%s\nstderr %s", code, out, errOut)
	}
	code, out, errOut = runStateArgs("list", "--data", dir)
	if code != exitOK || strings.Contains(out, "storage.vol1") || !strings.Contains(errOut, "1 record(s) set aside") {
		t.Fatalf("list: exit %d, stdout\n%s\nstderr %s", code, out, errOut)
	}
}

func TestStateLockedByDaemon(t *testing.T) {
	dir := stateFixture(t)
	st, err := state.Open(dir, state.NoSync()) // stands in for a running daemon
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	code, _, errOut := runStateArgs("list", "--data", dir)
	if code != exitFailure || !strings.Contains(errOut, "is held by another process (is a daemon running?)") {
		t.Fatalf("exit %d, stderr %q", code, errOut)
	}
}

func TestStateNoFile(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "absent")
	code, _, errOut := runStateArgs("check", "--data", dir)
	if code != exitFailure || !strings.Contains(errOut, "no state file") || !strings.Contains(errOut, dir) {
		t.Fatalf("exit %d, stderr %q", code, errOut)
	}
	if _, err := os.Stat(dir); !os.IsNotExist(err) {
		t.Fatal("state check created the data directory")
	}
}

func TestStateDefaultDataDir(t *testing.T) {
	dir := stateFixture(t)
	t.Chdir(filepath.Dir(dir))
	if err := os.Rename(dir, "forewarn-data"); err != nil {
		t.Fatal(err)
	}
	if code, out, errOut := runStateArgs("list"); code != exitOK || !strings.Contains(out, "shop.orders") {
		t.Fatalf("default --data: exit %d\n%s%s", code, out, errOut)
	}
}

func TestStateUsage(t *testing.T) {
	for _, tc := range []struct {
		args []string
		code int
		want string
	}{
		{nil, exitUsage, "missing subcommand"},
		{[]string{"frob"}, exitUsage, `unknown subcommand "frob"`},
		{[]string{"show"}, exitUsage, "show needs a TOPIC"},
		{[]string{"list", "extra"}, exitUsage, `unexpected argument "extra"`},
		{[]string{"show", "a", "b"}, exitUsage, `unexpected argument "b"`},
		{[]string{"list", "--bogus"}, exitUsage, "flag provided but not defined: -bogus"},
		{[]string{"list", "--data"}, exitUsage, "flag needs an argument"},
		{[]string{"-h"}, exitOK, "usage: forewarn state list"},
		{[]string{"show", "--help"}, exitOK, "usage: forewarn state list"},
	} {
		code, out, errOut := runStateArgs(tc.args...)
		if code != tc.code || !strings.Contains(out+errOut, tc.want) {
			t.Errorf("%q: exit %d, output %q; want exit %d and %q", tc.args, code, out+errOut, tc.code, tc.want)
		}
	}
}

func TestStateShowTopicAfterDoubleDash(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "data")
	st, err := state.Open(dir, state.NoSync())
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Save([]*series.Snapshot{{Topic: "-odd.topic", Kind: "gauge"}}); err != nil {
		t.Fatal(err)
	}
	st.Close()
	code, out, errOut := runStateArgs("show", "--data", dir, "--", "-odd.topic")
	if code != exitOK || !strings.Contains(out, `"topic": "-odd.topic"`) {
		t.Fatalf("exit %d\n%s%s", code, out, errOut)
	}
}

func TestFormatStep(t *testing.T) {
	for sec, want := range map[int64]string{1: "1s", 60: "1m", 90: "1m30s", 3600: "1h", 5400: "1h30m", 86400: "24h", 3661: "1h1m1s", 0: "0s", -5: "-5s"} {
		if got := formatStep(sec); got != want {
			t.Errorf("formatStep(%d) = %q, want %q", sec, got, want)
		}
	}
}

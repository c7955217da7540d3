package history

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/tauvox/tauvox/roi/phantom"
)

// TestMain lets the test binary act as a second process: with
// TAUVOX_HISTORY_CHILD set it runs one store action and exits.
func TestMain(m *testing.M) {
	if act := os.Getenv("TAUVOX_HISTORY_CHILD"); act != "" {
		os.Exit(child(act))
	}
	os.Exit(m.Run())
}

func child(act string) int {
	db, file := os.Getenv("TAUVOX_DB"), os.Getenv("TAUVOX_QA")
	s, err := Open(db, nil)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 3
	}
	defer s.Close()
	switch act {
	case "add", "add-and-hang":
		if act == "add-and-hang" {
			testPause = func() {
				fmt.Println("inside")
				os.Stdout.Sync()
				time.Sleep(time.Hour)
			}
		}
		b, _ := os.ReadFile(file)
		if _, err := s.Add(context.Background(), b, file); err != nil {
			fmt.Fprintln(os.Stderr, err)
			return 4
		}
	case "lock":
		tx, err := s.db.Begin()
		if err != nil {
			return 5
		}
		tx.Exec("INSERT INTO sessions (scanner, acquired, phantom, hash, field_t, temperature_c, tool_version, added) VALUES ('lock', 'x', 'p', 'h', 1, 1, 't', 'a')")
		fmt.Println("locked")
		os.Stdout.Sync()
		time.Sleep(time.Hour)
	}
	return 0
}

// session makes the qa.json of one session with the given deviations.
func session(date string, devs map[[2]string]float64) []byte {
	qa := phantom.QA{Format: phantom.QAFormat, Tool: phantom.Tool{Name: "tauvox", Version: "test"},
		Session: phantom.Session{Scanner: "MR-EAST", Date: date[:10], Time: strings.TrimSpace(date[10:]), Field: 1.5, Temperature: 21, Phantom: "demo"},
		Verdict: phantom.Pass}
	for k, d := range devs {
		qa.Vials = append(qa.Vials, phantom.VialQA{ID: k[0], Quantity: k[1], N: 40, Median: 1000 * (1 + d/100), Mean: 1000 * (1 + d/100),
			SD: 5, Reference: 1000, Deviation: d, Tolerance: 50, Verdict: phantom.Pass})
	}
	b, _ := json.Marshal(qa)
	return b
}

type refHistory struct {
	Dates  []string
	Series []struct {
		Vial, Quantity       string
		Deviation            []float64 `json:"deviation_pct"`
		Slope, CILow, CIHigh float64
		Stderr               float64
	}
}

func loadRef(t *testing.T) refHistory {
	raw, err := os.ReadFile("../../testdata/reference/history.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref refHistory
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	return ref
}

// fill records the reference history in a store and returns it.
func fill(t *testing.T, ref refHistory) (*Store, string) {
	path := filepath.Join(t.TempDir(), "history.db")
	s, err := Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	for i, d := range ref.Dates {
		devs := map[[2]string]float64{}
		for _, sr := range ref.Series {
			devs[[2]string{sr.Vial, sr.Quantity}] = sr.Deviation[i]
		}
		if r, err := s.Add(context.Background(), session(d, devs), "qa.json"); err != nil || r.Already {
			t.Fatalf("add %s: %+v %v", d, r, err)
		}
	}
	return s, path
}

// TestDriftAgainstScipy: a synthetic history with a −3 %/year drift in one
// vial (testdata/gen/history_refs.py, scipy.stats.linregress 1.10.1) gives
// that slope and interval, flags that vial as drifting and no other, and
// the drifting vial breaks rule 1 and the EWMA. The run rules also fire by
// chance on in-control series (their false-alarm rate is inherent, and a
// 12-session baseline underestimates σ now and then): the count is logged,
// not asserted.
func TestDriftAgainstScipy(t *testing.T) {
	ref := loadRef(t)
	var raw struct {
		Series []struct {
			Vial     string
			Quantity string
			Slope    float64 `json:"slope"`
			Low      float64 `json:"ci_low"`
			High     float64 `json:"ci_high"`
		}
	}
	b, _ := os.ReadFile("../../testdata/reference/history.json")
	json.Unmarshal(b, &raw)
	s, _ := fill(t, ref)
	defer s.Close()
	pts, err := s.Points(context.Background(), "")
	if err != nil {
		t.Fatal(err)
	}
	series := Analyse(pts, nil)
	if len(series) != 20 {
		t.Fatalf("%d series", len(series))
	}
	chance := 0
	want := map[string][3]float64{}
	for _, r := range raw.Series {
		want[r.Vial+" "+r.Quantity] = [3]float64{r.Slope, r.Low, r.High}
	}
	for _, sr := range series {
		w := want[sr.Vial+" "+sr.Quantity]
		if math.Abs(sr.Slope-w[0]) > 1e-6 || math.Abs(sr.SlopeLow-w[1]) > 1e-6 || math.Abs(sr.SlopeHigh-w[2]) > 1e-6 {
			t.Errorf("%s %s: slope %.6f [%.6f, %.6f], scipy %.6f [%.6f, %.6f]", sr.Vial, sr.Quantity, sr.Slope, sr.SlopeLow, sr.SlopeHigh, w[0], w[1], w[2])
		}
		drifting := sr.Vial == "A5" && sr.Quantity == "T1"
		if drifting {
			if !(sr.SlopeLow <= -3 && -3 <= sr.SlopeHigh) {
				t.Errorf("A5 T1: interval [%.3f, %.3f] misses −3 %%/year", sr.SlopeLow, sr.SlopeHigh)
			}
			t.Logf("A5 T1: slope %.3f %%/year [%.3f, %.3f], violations %v", sr.Slope, sr.SlopeLow, sr.SlopeHigh, sr.Violations)
			if !hasRule(sr.Violations, 1) || !hasRule(sr.Violations, RuleEWMA) || !hasRule(sr.Violations, RuleDrift) {
				t.Errorf("A5 T1: violations %v, want 1, %d and %d", sr.Violations, RuleEWMA, RuleDrift)
			}
		} else if len(sr.Violations) > 0 {
			chance++
		}
		if drifting != sr.Drifting {
			t.Errorf("%s %s: drifting %v (slope %.3f [%.3f, %.3f])", sr.Vial, sr.Quantity, sr.Drifting, sr.Slope, sr.SlopeLow, sr.SlopeHigh)
		}
	}
	t.Logf("in-control series with a chance rule violation: %d of %d", chance, len(series)-1)
}

func hasRule(v []int, k int) bool {
	for _, x := range v {
		if x == k {
			return true
		}
	}
	return false
}

// TestWesternElectricRules: sequences built from the rule texts (Western
// Electric 1956, as quoted in check-values §4.1), in units of σ around 0.
func TestWesternElectricRules(t *testing.T) {
	cases := []struct {
		name string
		z    []float64
		at   int // index of the point completing the pattern
		rule int
	}{
		{"one beyond 3σ", []float64{0.1, -0.2, 3.2}, 2, 1},
		{"one beyond −3σ", []float64{0.1, -3.1}, 1, 1},
		{"2 of 3 beyond 2σ", []float64{0, 2.5, 0.3, 2.1}, 3, 2},
		{"2 of 3 beyond −2σ", []float64{0, -2.5, -2.2}, 2, 2},
		{"4 of 5 beyond 1σ", []float64{0, 1.5, 1.2, 0.2, 1.1, 1.9}, 5, 3},
		{"8 in a row", []float64{-0.5, 0.2, 0.3, 0.1, 0.5, 0.9, 0.4, 0.2, 0.3}, 8, 4},
	}
	for _, c := range cases {
		r := westernElectric(c.z, 0, 1)
		found := false
		for _, k := range r[c.at] {
			found = found || k == c.rule
		}
		if !found {
			t.Errorf("%s: rules %v at %d, want %d", c.name, r[c.at], c.at, c.rule)
		}
		for i := 0; i < c.at; i++ {
			for _, k := range r[i] {
				if k == c.rule {
					t.Errorf("%s: rule %d already at point %d", c.name, k, i)
				}
			}
		}
	}
	// Near misses: 2 of 3 on opposite sides; 7 in a row; 3 of 5 beyond 1σ.
	for _, z := range [][]float64{{2.5, -2.5, 0.1}, {0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7}, {1.5, 0, 1.2, 0, 1.1}} {
		for i, r := range westernElectric(z, 0, 1) {
			if len(r) > 0 {
				t.Errorf("%v: rules %v at %d", z, r, i)
			}
		}
	}
}

// TestEWMALimitFactor: the asymptotic EWMA limit factor √(λ/(2−λ)) is
// 0.3333 for λ = 0.2 (check-values §2.4 [C]).
func TestEWMALimitFactor(t *testing.T) {
	s := &Series{Value: make([]float64, 200), InBaseline: make([]bool, 200)}
	s.Floor = 1
	s.ewma(&Settings{L: 1}, math.NaN(), 0)
	if w := s.EWMAHigh[199]; math.Abs(w-0.3333) > 5e-5 {
		t.Errorf("asymptotic half-width %g, want 0.3333", w)
	}
}

func TestAddIdempotentAndRemove(t *testing.T) {
	path := filepath.Join(t.TempDir(), "h.db")
	s, err := Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	ctx := context.Background()
	b := session("2026-03-01 09:00", map[[2]string]float64{{"A1", "T1"}: 0.5, {"A1", "T2"}: -1})
	r1, err := s.Add(ctx, b, "a.json")
	if err != nil || r1.Already {
		t.Fatal(r1, err)
	}
	r2, err := s.Add(ctx, b, "a.json")
	if err != nil || !r2.Already || r2.ID != r1.ID {
		t.Fatalf("second add: %+v %v", r2, err)
	}
	// Different content, same scanner/time/phantom: refused.
	other := session("2026-03-01 09:00", map[[2]string]float64{{"A1", "T1"}: 0.7})
	if _, err := s.Add(ctx, other, "b.json"); err == nil || !strings.Contains(err.Error(), "already holds a different session") {
		t.Errorf("conflicting add: %v", err)
	}
	list, _ := s.Sessions(ctx, "")
	pts, _ := s.Points(ctx, "")
	if len(list) != 1 || len(pts) != 2 {
		t.Errorf("%d sessions, %d points", len(list), len(pts))
	}
	if ok, err := s.Remove(ctx, r1.ID); !ok || err != nil {
		t.Errorf("remove: %v %v", ok, err)
	}
	pts, _ = s.Points(ctx, "")
	if len(pts) != 0 {
		t.Errorf("results left after removing the session (foreign key cascade): %d", len(pts))
	}
	if ok, _ := s.Remove(ctx, 999); ok {
		t.Error("removed a session that does not exist")
	}
}

func childCmd(t *testing.T, act, db, qa string) *exec.Cmd {
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "TAUVOX_HISTORY_CHILD="+act, "TAUVOX_DB="+db, "TAUVOX_QA="+qa)
	return cmd
}

// TestConcurrentAdds: several processes adding at once lose nothing (WAL,
// busy timeout, immediate transactions).
func TestConcurrentAdds(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "h.db")
	s, err := Open(db, nil)
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	const n = 6
	var wg sync.WaitGroup
	errs := make([]error, n)
	for i := 0; i < n; i++ {
		qa := filepath.Join(dir, fmt.Sprintf("qa%d.json", i))
		os.WriteFile(qa, session(fmt.Sprintf("2026-04-%02d 10:00", i+1), map[[2]string]float64{{"A1", "T1"}: float64(i)}), 0o644)
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			out, err := childCmd(t, "add", db, qa).CombinedOutput()
			if err != nil {
				errs[i] = fmt.Errorf("%v: %s", err, out)
			}
		}(i)
	}
	wg.Wait()
	for _, e := range errs {
		if e != nil {
			t.Error(e)
		}
	}
	s, _ = Open(db, nil)
	defer s.Close()
	list, _ := s.Sessions(context.Background(), "")
	if len(list) != n {
		t.Errorf("%d sessions recorded, want %d", len(list), n)
	}
}

// TestKilledAdd: a process killed inside an add leaves the database
// consistent and without a partial session.
func TestKilledAdd(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "h.db")
	s, _ := Open(db, nil)
	ctx := context.Background()
	s.Add(ctx, session("2026-01-01 09:00", map[[2]string]float64{{"A1", "T1"}: 1}), "first")
	s.Close()
	qa := filepath.Join(dir, "qa.json")
	os.WriteFile(qa, session("2026-02-01 09:00", map[[2]string]float64{{"A1", "T1"}: 2, {"A2", "T1"}: 3}), 0o644)
	cmd := childCmd(t, "add-and-hang", db, qa)
	out, _ := cmd.StdoutPipe()
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	buf := make([]byte, 6)
	if _, err := out.Read(buf); err != nil || string(buf) != "inside" {
		t.Fatalf("child did not reach the pause: %q %v", buf, err)
	}
	cmd.Process.Kill()
	cmd.Wait()
	s, err := Open(db, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if r, err := s.Integrity(ctx); err != nil || r != "ok" {
		t.Errorf("integrity_check: %q %v", r, err)
	}
	list, _ := s.Sessions(ctx, "")
	pts, _ := s.Points(ctx, "")
	if len(list) != 1 || len(pts) != 1 {
		t.Errorf("after the kill: %d sessions, %d results; want the first session only", len(list), len(pts))
	}
	// The same add now succeeds.
	b, _ := os.ReadFile(qa)
	if r, err := s.Add(ctx, b, qa); err != nil || r.Already {
		t.Errorf("retry: %+v %v", r, err)
	}
}

// TestLocked: a database held by another process beyond the busy timeout
// gives ErrLocked, and nothing is lost.
func TestLocked(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "h.db")
	s, _ := Open(db, nil)
	s.Close()
	cmd := childCmd(t, "lock", db, "")
	out, _ := cmd.StdoutPipe()
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer func() { cmd.Process.Kill(); cmd.Wait() }()
	buf := make([]byte, 6)
	if _, err := out.Read(buf); err != nil || string(buf) != "locked" {
		t.Fatalf("child did not lock: %q %v", buf, err)
	}
	s, err := Open(db, &Options{BusyTimeout: 300 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	_, err = s.Add(context.Background(), session("2026-05-01 09:00", map[[2]string]float64{{"A1", "T1"}: 1}), "qa.json")
	if !errors.Is(err, ErrLocked) || !strings.Contains(err.Error(), db) {
		t.Errorf("locked database: %v", err)
	}
}

func TestBadFiles(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.db")
	os.WriteFile(bad, []byte(strings.Repeat("this is not sqlite ", 100)), 0o644)
	if _, err := Open(bad, nil); err == nil || !strings.Contains(err.Error(), bad) {
		t.Errorf("corrupt database: %v", err)
	}
	if b, _ := os.ReadFile(bad); !strings.HasPrefix(string(b), "this is not sqlite") {
		t.Error("the corrupt file was changed")
	}
	s, _ := Open(filepath.Join(dir, "h.db"), nil)
	defer s.Close()
	for _, c := range []struct{ json, want string }{
		{`{"format":"tauvox-qa/0"}`, `format "tauvox-qa/0", this tauvox reads "tauvox-qa/1"`},
		{`not json`, "not a qa.json"},
		{`{"format":"tauvox-qa/1","session":{"scanner":"x","date":"yesterday","phantom":"p"},"vials":[{"id":"a"}]}`, `session date "yesterday" is not a date (YYYY-MM-DD)`},
		{`{"format":"tauvox-qa/1","session":{"scanner":"x","date":"2026-01-01","phantom":"p","field_T":3,"temperature_C":20}}`, "no vial results"},
	} {
		if _, err := s.Add(context.Background(), []byte(c.json), "q.json"); err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "q.json: ") {
			t.Errorf("%s: %v", c.json, err)
		}
	}
}

// TestMigration: a version-1 database with data opens, migrates to the
// current version and keeps its rows.
func TestMigration(t *testing.T) {
	path := filepath.Join(t.TempDir(), "old.db")
	old, err := Open(path, &Options{maxVersion: 1})
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if v, _ := old.Version(ctx); v != 1 {
		t.Fatalf("version %d", v)
	}
	if _, err := old.db.Exec(`INSERT INTO sessions (scanner, acquired, phantom, hash, field_t, temperature_c, tool_version, added)
		VALUES ('MR-OLD', '2025-06-01 10:00', 'demo', 'abc', 3, 20.5, 'v0', '2025-06-01T10:00:00Z');
		INSERT INTO results (session_id, vial, quantity, n, mean, median, sd, reference, deviation_pct, verdict)
		VALUES (1, 'A1', 'T1', 40, 101, 100.5, 2, 100, 0.5, 'pass')`); err != nil {
		t.Fatal(err)
	}
	old.Close()
	s, err := Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if v, _ := s.Version(ctx); v != SchemaVersion {
		t.Errorf("version after migration %d", v)
	}
	pts, err := s.Points(ctx, "MR-OLD")
	if err != nil || len(pts) != 1 || pts[0].Median != 100.5 || pts[0].Deviation != 0.5 || !math.IsNaN(pts[0].Tolerance) {
		t.Errorf("after migration: %+v %v", pts, err)
	}
}

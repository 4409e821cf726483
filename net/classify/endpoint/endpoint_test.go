package endpoint_test

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// The models are trained on the invented demo data; the tests check
// properties of the server that hold for any model.

var (
	modelOnce  sync.Once
	modelPaths [2]string
	modelErr   error
)

// models trains two demo models (different seeds) once per test binary
// and returns the paths of their files.
func models(t testing.TB) [2]string {
	modelOnce.Do(func() {
		dir, err := os.MkdirTemp("", "endpoint-test")
		if err != nil {
			modelErr = err
			return
		}
		split, err := demo.Pumps[float64](600)
		if err != nil {
			modelErr = err
			return
		}
		for i := range modelPaths {
			tr := split.Train
			n, _ := net.NewBuilder[float64](tr.Features).ConstantFeature("one").
				Dense("hidden1", 16).ReLU("relu1").Dense("hidden2", 16).ReLU("relu2").
				Readout("readout", tr.Outputs).Build()
			n.Init(net.InitSettings{Rho0: 1, Seed: uint64(i + 1)})
			w, _ := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
			trn, _ := optim.NewTrainer[float64](w, loss.Square[float64]{}, tr, optim.Settings{LearningRate: 0.1, BatchSize: 32, Epochs: 5, Seed: uint64(i + 1)})
			if _, err := trn.Run(context.Background()); err != nil {
				modelErr = err
				return
			}
			modelPaths[i] = filepath.Join(dir, fmt.Sprintf("m%d.model", i))
			modelErr = modelfile.Save(modelPaths[i], &modelfile.Model[float64]{Network: n, Normalized: w, Pipeline: split.Pipeline, Classes: tr.Classes, Label: demo.Label})
			if modelErr != nil {
				return
			}
		}
	})
	if modelErr != nil {
		if t == nil {
			panic(modelErr)
		}
		t.Fatal(modelErr)
	}
	return modelPaths
}

// quiet is a logger for tests whose logs are not looked at.
var quiet = slog.New(slog.DiscardHandler)

func load(t testing.TB, path string) *classify.Model {
	t.Helper()
	m, err := classify.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

const goodRow = `{"site": "river-intake", "vib_rms_mm_s": 1.576, "vib_kurtosis": "2.505", "crest_factor": 3.283,
	"band_1x_ratio": 0.4781, "band_hf_ratio": 0.0887, "temp_rise_c": 20.30,
	"current_imbalance_pct": 1.65, "suction_kpa": 127.0}`

var goodMap = map[string]string{
	"site": "river-intake", "vib_rms_mm_s": "1.576", "vib_kurtosis": "2.505", "crest_factor": "3.283",
	"band_1x_ratio": "0.4781", "band_hf_ratio": "0.0887", "temp_rise_c": "20.30",
	"current_imbalance_pct": "1.65", "suction_kpa": "127.0",
}

func post(t testing.TB, h http.Handler, body string) (*httptest.ResponseRecorder, map[string]any) {
	t.Helper()
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest("POST", "/classify", strings.NewReader(body)))
	var out map[string]any
	if err := json.Unmarshal(rec.Body.Bytes(), &out); err != nil {
		t.Fatalf("response is not JSON: %v\n%s", err, rec.Body)
	}
	return rec, out
}

// TestClassify: a batch of rows gets the same scores, bit for bit, as
// classify gives directly (encoding/json writes the shortest decimal that
// reads back to the same float64), and the model's version.
func TestClassify(t *testing.T) {
	m := load(t, models(t)[0])
	h := endpoint.New(m, endpoint.Options{Log: quiet})
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest("POST", "/classify", strings.NewReader(`{"rows": [`+goodRow+`, `+goodRow+`]}`)))
	if rec.Code != 200 {
		t.Fatalf("status %d: %s", rec.Code, rec.Body)
	}
	var resp endpoint.Response
	if err := json.Unmarshal(rec.Body.Bytes(), &resp); err != nil {
		t.Fatal(err)
	}
	want, err := m.ClassifyMap(nil, goodMap)
	if err != nil {
		t.Fatal(err)
	}
	if resp.ModelVersion != m.Info().Version || len(resp.Answers) != 2 {
		t.Fatalf("response %+v", resp)
	}
	for _, p := range resp.Answers {
		if p.Class != want.Label || !slices.Equal(p.Scores, want.Scores) {
			t.Fatalf("prediction %+v; classify gives %v %v", p, want.Label, want.Scores)
		}
	}
	for _, path := range []string{"/model", "/health"} {
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, httptest.NewRequest("GET", path, nil))
		if rec.Code != 200 || !strings.Contains(rec.Body.String(), m.Info().Version) {
			t.Errorf("GET %s: %d %s", path, rec.Code, rec.Body)
		}
	}
}

// TestBadRequests: each bad request gets its status and a JSON error
// naming the row and field where there is one.
func TestBadRequests(t *testing.T) {
	m := load(t, models(t)[0])
	h := endpoint.New(m, endpoint.Options{MaxRows: 3, MaxBodyBytes: 4096, Log: quiet})
	bad := strings.Replace(goodRow, "river-intake", "moon-base", 1)
	for _, tc := range []struct {
		name, body string
		status     int
		row        float64 // -1: no row
		field      string
	}{
		{"bad JSON", `{"rows": [`, 400, -1, ""},
		{"unknown key", `{"lines": []}`, 400, -1, ""},
		{"no rows", `{"rows": []}`, 400, -1, ""},
		{"too many rows", `{"rows": [` + strings.Repeat(goodRow+",", 3) + goodRow + `]}`, 400, -1, ""},
		{"too large", `{"rows": [` + strings.Repeat(goodRow+",", 40) + goodRow + `]}`, 413, -1, ""},
		{"unknown category", `{"rows": [` + goodRow + `, ` + bad + `]}`, 400, 1, "site"},
		{"unknown key", `{"rows": [], "colour": "red"}`, 400, -1, ""},
		{"null body", `null`, 400, -1, ""},
		{"empty body", ``, 400, -1, ""},
		{"rows not an array", `{"rows": {}}`, 400, -1, ""},
		{"row not an object", `{"rows": [1]}`, 400, -1, ""},
		{"number out of range", `{"vectors": [[1e999]]}`, 400, -1, ""},
		{"nested value", `{"rows": [` + strings.Replace(goodRow, "3.283", `{"v": 3}`, 1) + `]}`, 400, 0, "crest_factor"},
		{"not a number", `{"rows": [` + strings.Replace(goodRow, "3.283", `"high"`, 1) + `]}`, 400, 0, "crest_factor"},
		{"bool value", `{"rows": [` + strings.Replace(goodRow, "3.283", `true`, 1) + `]}`, 400, 0, "crest_factor"},
		{"vector width", `{"vectors": [[1, 2]]}`, 400, 0, ""},
	} {
		rec, out := post(t, h, tc.body)
		e, _ := out["error"].(map[string]any)
		if rec.Code != tc.status || e == nil || e["message"] == "" {
			t.Errorf("%s: status %d, body %s; want %d with a JSON error", tc.name, rec.Code, rec.Body, tc.status)
			continue
		}
		row, hasRow := e["row"].(float64)
		if (tc.row >= 0) != hasRow || (hasRow && row != tc.row) || e["field"] != nil && e["field"] != tc.field || tc.field != "" && e["field"] != tc.field {
			t.Errorf("%s: error %v; want row %v field %q", tc.name, e, tc.row, tc.field)
		}
	}
}

// TestOverloadAndTimeout: with one request in flight (held inside its
// in-flight place by a test hook) a second gets 503 with Retry-After at
// once, not queued (RFC 9110 §15.6.4 allows Retry-After on 503); the held
// one gets 503 when its time runs out. Loopback only (httptest.NewServer
// listens on 127.0.0.1).
func TestOverloadAndTimeout(t *testing.T) {
	m := load(t, models(t)[0])
	entered, release := make(chan struct{}, 1), make(chan struct{})
	restore := endpoint.SetAcquiredHook(func() { entered <- struct{}{}; <-release })
	defer restore()
	h := endpoint.New(m, endpoint.Options{MaxInFlight: 1, Timeout: 100 * time.Millisecond, Log: quiet})
	srv := httptest.NewServer(h)
	defer srv.Close()
	body := `{"rows": [` + goodRow + `]}`
	first := make(chan int, 1)
	go func() {
		resp, err := http.Post(srv.URL+"/classify", "application/json", strings.NewReader(body))
		if err != nil {
			first <- -1
			return
		}
		resp.Body.Close()
		first <- resp.StatusCode
	}()
	select {
	case <-entered:
	case <-time.After(10 * time.Second):
		t.Fatal("the first request never took its place")
	}
	resp, err := http.Post(srv.URL+"/classify", "application/json", strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 503 || resp.Header.Get("Retry-After") == "" {
		t.Errorf("second request: %d; want 503 with Retry-After", resp.StatusCode)
	}
	time.Sleep(200 * time.Millisecond) // past the first one's Timeout
	close(release)
	select {
	case code := <-first:
		if code != 503 {
			t.Errorf("held request: %d; want 503 after its timeout", code)
		}
	case <-time.After(10 * time.Second):
		t.Error("the held request never finished")
	}
}

// TestReloadBroken: a broken model file is refused, logged with the
// reason, and the old model keeps serving; a good one is swapped in.
func TestReloadBroken(t *testing.T) {
	paths := models(t)
	var logs bytes.Buffer
	h := endpoint.New(load(t, paths[0]), endpoint.Options{Log: slog.New(slog.NewTextHandler(&logs, nil))})
	v0 := h.Model().Info().Version
	good, _ := os.ReadFile(paths[1])
	broken := filepath.Join(t.TempDir(), "broken.model")
	os.WriteFile(broken, good[:len(good)-100], 0o644)
	if err := h.Reload(broken); err == nil {
		t.Fatal("a truncated file was accepted")
	}
	if h.Model().Info().Version != v0 || !strings.Contains(logs.String(), "model file refused") || !strings.Contains(logs.String(), "truncated") {
		t.Fatalf("after a broken file: version %s (want %s); log:\n%s", h.Model().Info().Version, v0, logs.String())
	}
	if _, out := post(t, h, `{"rows": [`+goodRow+`]}`); out["model_version"] != v0 {
		t.Fatalf("served by %v", out["model_version"])
	}
	if err := h.Reload(paths[1]); err != nil || h.Model().Info().Version == v0 {
		t.Fatalf("good file: %v", err)
	}
}

// TestLoadWithSwap is the bounded loopback load test: a fixed number of
// requests from a fixed number of clients, under a fixed time cap, with
// the model swapped back and forth while they run. Every request must
// succeed, and every answer must be exactly what the model it names gives
// (so no request was dropped or answered by a half-swapped model).
// Throughput and latency are logged, not asserted: the machine is shared.
func TestLoadWithSwap(t *testing.T) {
	paths := models(t)
	ms := [2]*classify.Model{load(t, paths[0]), load(t, paths[1])}
	want := map[string][]float64{}
	for _, m := range ms {
		a, err := m.ClassifyMap(nil, goodMap)
		if err != nil {
			t.Fatal(err)
		}
		want[m.Info().Version] = append([]float64(nil), a.Scores...)
	}
	requests, clients := 2000, 8
	if testing.Short() {
		requests = 400
	}
	h := endpoint.New(ms[0], endpoint.Options{MaxInFlight: 2 * clients, Log: slog.New(slog.NewTextHandler(io.Discard, nil))})
	srv := httptest.NewServer(h) // 127.0.0.1 only
	defer srv.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	body := `{"rows": [` + goodRow + `, ` + goodRow + `, ` + goodRow + `, ` + goodRow + `]}`

	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	var next, done, failed atomic.Int64
	lat := make([]time.Duration, requests)
	seen := make([]string, requests)
	swapped := make(chan struct{})
	go func() { // swap at a third and two thirds of the run
		defer close(swapped)
		for i, at := range []int64{int64(requests) / 3, 2 * int64(requests) / 3} {
			for done.Load() < at && ctx.Err() == nil {
				time.Sleep(time.Millisecond)
			}
			if err := h.Reload(paths[(i+1)%2]); err != nil {
				t.Error(err)
			}
		}
	}()
	start := time.Now()
	var wg sync.WaitGroup
	for range clients {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := next.Add(1) - 1
				if i >= int64(requests) || ctx.Err() != nil {
					return
				}
				t0 := time.Now()
				req, _ := http.NewRequestWithContext(ctx, "POST", srv.URL+"/classify", strings.NewReader(body))
				resp, err := http.DefaultClient.Do(req)
				if err != nil {
					failed.Add(1)
					t.Errorf("request %d: %v", i, err)
					continue
				}
				var r endpoint.Response
				derr := json.NewDecoder(resp.Body).Decode(&r)
				resp.Body.Close()
				lat[i] = time.Since(t0)
				if resp.StatusCode != 200 || derr != nil || len(r.Answers) != 4 {
					failed.Add(1)
					t.Errorf("request %d: status %d, %v", i, resp.StatusCode, derr)
					continue
				}
				for _, p := range r.Answers {
					if !slices.Equal(p.Scores, want[r.ModelVersion]) {
						failed.Add(1)
						t.Errorf("request %d: scores %v are not model %s's %v", i, p.Scores, r.ModelVersion, want[r.ModelVersion])
					}
				}
				seen[i] = r.ModelVersion
				done.Add(1)
			}
		}()
	}
	wg.Wait()
	elapsed := time.Since(start)
	<-swapped
	runtime.GC()
	runtime.ReadMemStats(&after)
	if ctx.Err() != nil {
		t.Fatalf("the load test ran out of its time cap after %d of %d requests", done.Load(), requests)
	}
	if done.Load() != int64(requests) || failed.Load() != 0 {
		t.Fatalf("%d of %d requests succeeded, %d failed", done.Load(), requests, failed.Load())
	}
	versions := map[string]int{}
	for _, v := range seen {
		versions[v]++
	}
	if len(versions) != 2 {
		t.Errorf("answers came from %d model versions; the swaps should give 2: %v", len(versions), versions)
	}
	slices.Sort(lat)
	t.Logf("%d requests (4 rows each) from %d clients in %v: %.0f requests/s; latency p50 %v, p99 %v; heap %d KiB before, %d KiB after; answers by version %v",
		requests, clients, elapsed.Round(time.Millisecond), float64(requests)/elapsed.Seconds(),
		lat[len(lat)/2], lat[len(lat)*99/100], before.HeapAlloc>>10, after.HeapAlloc>>10, versions)
}

// BenchmarkHTTP is requests per second on loopback, one row per request,
// with as many concurrent clients as GOMAXPROCS.
func BenchmarkHTTP(b *testing.B) {
	h := endpoint.New(load(b, models(b)[0]), endpoint.Options{Log: quiet})
	srv := httptest.NewServer(h)
	defer srv.Close()
	body := `{"rows": [` + goodRow + `]}`
	b.ReportAllocs()
	b.RunParallel(func(pb *testing.PB) {
		for pb.Next() {
			resp, err := http.Post(srv.URL+"/classify", "application/json", strings.NewReader(body))
			if err != nil {
				b.Fatal(err)
			}
			io.Copy(io.Discard, resp.Body)
			resp.Body.Close()
			if resp.StatusCode != 200 {
				b.Fatalf("status %d", resp.StatusCode)
			}
		}
	})
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "requests/s")
}

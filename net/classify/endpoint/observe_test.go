package endpoint_test

import (
	"bufio"
	"bytes"
	"encoding/json"
	"log/slog"
	"math"
	"net/http/httptest"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/rhomb/rhomb/net/classify/endpoint"
)

// gapOf is a row's distance from another answer, written out here: the
// largest score minus the second largest, or |s| for one score (threshold
// 0) (common practice, no source).
func gapOf(scores []float64) float64 {
	if len(scores) == 1 {
		return math.Abs(scores[0])
	}
	s := append([]float64(nil), scores...)
	sort.Float64s(s)
	return s[len(s)-1] - s[len(s)-2]
}

// TestObserverAndLog: each request gives one log record with the method,
// path, status, rows, latency and model version, and one Observer call
// with the same, the route, and for a 200 from /classify the normalized
// margin of each row — the response's margin field, and the gap of its
// scores divided by the model's scale ρ; each Reload, good or
// broken, calls the Reload hook.
func TestObserverAndLog(t *testing.T) {
	paths := models(t)
	var mu sync.Mutex
	var reqs []endpoint.RequestInfo
	var reloads []endpoint.ReloadInfo
	var logs bytes.Buffer
	obs := &endpoint.Observer{
		Request: func(i endpoint.RequestInfo) {
			mu.Lock()
			defer mu.Unlock()
			i.Margins = append([]float64(nil), i.Margins...)
			reqs = append(reqs, i)
		},
		Reload: func(i endpoint.ReloadInfo) { mu.Lock(); reloads = append(reloads, i); mu.Unlock() },
	}
	h := endpoint.New(load(t, paths[0]), endpoint.Options{Observer: obs, Log: quiet, RequestLog: slog.New(slog.NewJSONHandler(&logs, nil))})
	v0 := h.Model().Info().Version
	rec, _ := post(t, h, `{"rows": [`+goodRow+`, `+goodRow+`, `+goodRow+`]}`)
	var resp endpoint.Response
	json.Unmarshal(rec.Body.Bytes(), &resp)
	post(t, h, `{"rows": [}`)
	for _, path := range []string{"/health", "/elsewhere"} {
		h.ServeHTTP(httptest.NewRecorder(), httptest.NewRequest("GET", path, nil))
	}

	want := []endpoint.RequestInfo{
		{Method: "POST", Path: "/classify", Route: "/classify", Status: 200, Rows: 3, ModelVersion: v0},
		{Method: "POST", Path: "/classify", Route: "/classify", Status: 400, ModelVersion: v0},
		{Method: "GET", Path: "/health", Route: "/health", Status: 200, ModelVersion: v0},
		{Method: "GET", Path: "/elsewhere", Status: 404},
	}
	if len(reqs) != len(want) {
		t.Fatalf("%d Observer calls for %d requests", len(reqs), len(want))
	}
	for i, w := range want {
		g := reqs[i]
		if g.Method != w.Method || g.Path != w.Path || g.Route != w.Route || g.Status != w.Status || g.Rows != w.Rows || g.ModelVersion != w.ModelVersion || g.Latency <= 0 {
			t.Errorf("request %d: %+v; want %+v", i, g, w)
		}
	}
	if len(reqs[0].Margins) != 3 || len(resp.Answers) != 3 {
		t.Fatalf("margins %v for %d answers", reqs[0].Margins, len(resp.Answers))
	}
	rho := h.Model().Scale()
	for i, a := range resp.Answers {
		// The gap is one subtraction and the division one more rounding;
		// classify finds the top two scores by a scan, this test by a
		// sort: the same two numbers, so the same bits.
		if want := gapOf(a.Scores) / rho; reqs[0].Margins[i] != a.Margin || a.Margin != want {
			t.Errorf("row %d: observed margin %v, response %v; the scores %v give %v", i, reqs[0].Margins[i], a.Margin, a.Scores, want)
		}
	}
	if reqs[1].Margins != nil {
		t.Errorf("a failed request reported margins %v", reqs[1].Margins)
	}

	// One JSON record per request, with the fields the operator's guide names.
	sc := bufio.NewScanner(&logs)
	n := 0
	for sc.Scan() {
		var r map[string]any
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatalf("log line %q: %v", sc.Text(), err)
		}
		if n < len(want) {
			w := want[n]
			if r["msg"] != "request" || r["method"] != w.Method || r["path"] != w.Path || r["status"] != float64(w.Status) ||
				r["rows"] != float64(w.Rows) || r["model_version"] != w.ModelVersion || r["latency"] == nil {
				t.Errorf("log record %d: %v; want %+v", n, r, w)
			}
		}
		n++
	}
	if n != len(want) {
		t.Errorf("%d log records for %d requests", n, len(want))
	}

	broken := filepath.Join(t.TempDir(), "broken.model")
	os.WriteFile(broken, []byte("not a model"), 0o644)
	if h.Reload(broken) == nil || h.Reload(paths[1]) != nil {
		t.Fatal("reloads")
	}
	v1 := h.Model().Info().Version
	if len(reloads) != 2 {
		t.Fatalf("%d Reload calls for 2 reloads", len(reloads))
	}
	if r := reloads[0]; r.Err == nil || r.Version != v0 || r.OldVersion != v0 || r.Path != broken || r.Model == nil || r.Model.Info().Version != v0 {
		t.Errorf("broken reload: %+v", r)
	}
	if r := reloads[1]; r.Err != nil || r.Version != v1 || r.OldVersion != v0 || r.Path != paths[1] || r.LoadTime <= 0 || r.LoadTime > time.Minute {
		t.Errorf("good reload: %+v", r)
	}
	if !strings.Contains(h.String(), "unknown fields ignored") {
		t.Errorf("String: %s", h)
	}
}

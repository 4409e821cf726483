package endpoint_test

import (
	"bufio"
	"bytes"
	"encoding/json"
	"log/slog"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/rhomb/rhomb/net/classify/endpoint"
)

// TestScoreMargin checks the plain score margin against its definition:
// the largest score minus the second largest, whatever their positions,
// and |s| for one score.
func TestScoreMargin(t *testing.T) {
	for _, tc := range []struct {
		scores []float64
		want   float64
	}{
		{nil, 0},
		{[]float64{0.75}, 0.75},
		{[]float64{-1.5}, 1.5},
		{[]float64{1, 5, 4}, 1},
		{[]float64{5, 1, 4}, 1},
		{[]float64{4, 1, 5}, 1},
		{[]float64{2, 2}, 0},
		{[]float64{-3, -1, -2, -7}, 1},
		{[]float64{0.5, -0.25}, 0.75},
	} {
		if got := endpoint.ScoreMargin(tc.scores); got != tc.want {
			t.Errorf("ScoreMargin(%v) = %v; want %v", tc.scores, got, tc.want)
		}
	}
}

// TestObserverAndLog: each request gives one log record with the method,
// path, status, rows, latency and model version, and one Observer call
// with the same, the route, and for a 200 from /classify the score margin
// of each row as the response's scores give it; each Reload, good or
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
	for i, a := range resp.Answers {
		if reqs[0].Margins[i] != endpoint.ScoreMargin(a.Scores) {
			t.Errorf("row %d: margin %v; the scores %v give %v", i, reqs[0].Margins[i], a.Scores, endpoint.ScoreMargin(a.Scores))
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

package endpoint_test

import (
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/net/classify/endpoint"
)

// do sends one request to srv and returns the status, headers and the
// decoded JSON body (nil when the body is empty).
func do(t testing.TB, srv *httptest.Server, method, path, body string, hdr map[string]string) (int, http.Header, map[string]any) {
	t.Helper()
	req, err := http.NewRequest(method, srv.URL+path, strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	for k, v := range hdr {
		req.Header.Set(k, v)
	}
	resp, err := srv.Client().Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var out map[string]any
	if err := json.NewDecoder(resp.Body).Decode(&out); err != nil && method != "HEAD" {
		t.Fatalf("%s %s: status %d, body is not JSON: %v", method, path, resp.StatusCode, err)
	}
	return resp.StatusCode, resp.Header, out
}

// jsonError returns the message of a {"error": {"message": …}} body, or
// "" when the body has not that shape.
func jsonError(out map[string]any) string {
	e, _ := out["error"].(map[string]any)
	m, _ := e["message"].(string)
	return m
}

// TestNotFoundAndMethod: an unknown path gets 404 and a known path with a
// method it does not take gets 405, both with the JSON error body of every
// other error; the 405 carries an Allow header (RFC 9110 §15.5.6: the
// origin server MUST generate one), and every method that Allow lists is
// in fact served (RFC 9110 §10.2.1: Allow lists the supported methods).
func TestNotFoundAndMethod(t *testing.T) {
	h := endpoint.New(load(t, models(t)[0]), endpoint.Options{Log: quiet})
	srv := httptest.NewServer(h)
	defer srv.Close()
	for _, path := range []string{"/", "/nothing", "/classify/", "/health/x"} {
		code, hdr, out := do(t, srv, "GET", path, "", nil)
		if code != 404 || jsonError(out) == "" || !strings.HasPrefix(hdr.Get("Content-Type"), "application/json") {
			t.Errorf("GET %s: %d %v %q; want 404 with a JSON error", path, code, out, hdr.Get("Content-Type"))
		}
	}
	for _, tc := range []struct{ method, path string }{
		{"GET", "/classify"}, {"PUT", "/classify"}, {"DELETE", "/model"}, {"POST", "/health"},
	} {
		code, hdr, out := do(t, srv, tc.method, tc.path, "", nil)
		allow := hdr.Get("Allow")
		if code != 405 || jsonError(out) == "" || allow == "" {
			t.Errorf("%s %s: %d Allow %q %v; want 405 with Allow and a JSON error", tc.method, tc.path, code, allow, out)
			continue
		}
		for _, m := range strings.Split(allow, ",") {
			m = strings.TrimSpace(m)
			body := ""
			if m == "POST" {
				body = `{"rows": [` + goodRow + `]}`
			}
			if code, _, _ := do(t, srv, m, tc.path, body, nil); code != 200 {
				t.Errorf("%s %s, a method its 405 allows: %d", m, tc.path, code)
			}
		}
	}
}

// TestModelHidesPath: GET /model gives the model file's base name, never
// the directory it was loaded from. Before the fix it gave the absolute
// path.
func TestModelHidesPath(t *testing.T) {
	path := models(t)[0]
	h := endpoint.New(load(t, path), endpoint.Options{Log: quiet})
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest("GET", "/model", nil))
	var out map[string]any
	if err := json.Unmarshal(rec.Body.Bytes(), &out); err != nil {
		t.Fatal(err)
	}
	if rec.Code != 200 || out["source"] != filepath.Base(path) {
		t.Fatalf("source %v; want %q", out["source"], filepath.Base(path))
	}
	if dir := filepath.Dir(path); strings.Contains(rec.Body.String(), dir) {
		t.Fatalf("GET /model names the directory %s:\n%s", dir, rec.Body)
	}
}

// goIdent matches what looks like a Go identifier or Go type in a
// message: a package-qualified name (prep.Options, json.Number), a Go
// type word, or the "json:"/"prep:"/"classify:" prefixes of Go errors.
var goIdent = regexp.MustCompile(`\b[a-z]+\.[A-Z]\w*|\bGo (struct|value)\b|\b(json|prep|classify|endpoint): |\bfloat64\b|\[\]|map\[|Pipeline|Options\b|RawMessage`)

// TestMessagesSpeakHTTP: the messages of bad requests name JSON keys,
// fields and routes, never Go identifiers (house rule for HTTP errors;
// common practice, no source).
func TestMessagesSpeakHTTP(t *testing.T) {
	h := endpoint.New(load(t, models(t)[0]), endpoint.Options{MaxRows: 3, MaxBodyBytes: 4096, RefuseUnknownFields: true, Log: quiet})
	for _, body := range []string{
		`{"rows": [`, `{"rows": [}`, ``, `[1]`, `{"lines": []}`, `{"rows": {}}`, `{"rows": [1]}`,
		`{"vectors": [["a"]]}`, `{"vectors": [[1e999]]}`, `{"vectors": [[1, 2]]}`, `{"rows": [{"colour": "red"}]}`,
		`{"rows": [` + strings.Replace(goodRow, "river-intake", "moon-base", 1) + `]}`,
		`{"rows": [` + strings.Replace(goodRow, "3.283", `"high"`, 1) + `]}`,
		`{"rows": [` + strings.Replace(goodRow, "3.283", `1e999`, 1) + `]}`,
		`{"rows": [` + strings.Replace(goodRow, "3.283", `true`, 1) + `]}`,
		`{"rows": [` + strings.Repeat(goodRow+",", 40) + goodRow + `]}`,
	} {
		rec, out := post(t, h, body)
		msg := jsonError(out)
		if rec.Code < 400 || msg == "" {
			t.Errorf("%.40s: status %d, message %q; want an error", body, rec.Code, msg)
		}
		if m := goIdent.FindString(msg); m != "" {
			t.Errorf("%.40s: message names %q, a Go identifier: %s", body, m, msg)
		}
	}
}

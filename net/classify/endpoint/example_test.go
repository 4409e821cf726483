package endpoint_test

import (
	"encoding/json"
	"fmt"
	"log"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"

	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
)

func TestMain(m *testing.M) {
	code := m.Run()
	if modelPaths[0] != "" {
		os.RemoveAll(filepath.Dir(modelPaths[0]))
	}
	os.Exit(code)
}

// Serve a model file and classify a row over HTTP.
func Example() {
	m, err := classify.Load(models(nil)[0]) // a model trained on the demo data
	if err != nil {
		log.Fatal(err)
	}
	h := endpoint.New(m, endpoint.Options{MaxRows: 100, RequestLog: slog.New(slog.DiscardHandler)})
	srv := httptest.NewServer(h) // a real service: an http.Server with timeouts; see examples/classify-server
	defer srv.Close()

	// A row with a field the model does not take, and one it leaves out.
	row := strings.Replace(goodRow, `"temp_rise_c": 20.30,`, `"operator_note": "checked",`, 1)
	resp, err := http.Post(srv.URL+"/classify", "application/json", strings.NewReader(`{"rows": [`+row+`]}`))
	if err != nil {
		log.Fatal(err)
	}
	defer resp.Body.Close()
	var out endpoint.Response
	json.NewDecoder(resp.Body).Decode(&out)
	a := out.Answers[0]
	fmt.Println(resp.StatusCode, a.Class, len(a.Scores), "scores; filled in:", a.FilledFields, "ignored:", out.IgnoredFields)

	resp2, err := http.Post(srv.URL+"/classify", "application/json", strings.NewReader(`{"rows": [{"site": "moon-base"}]}`))
	if err != nil {
		log.Fatal(err)
	}
	defer resp2.Body.Close()
	var e endpoint.Error
	json.NewDecoder(resp2.Body).Decode(&e)
	fmt.Println(resp2.StatusCode, *e.Error.Row, e.Error.Field)
	// Output:
	// 200 healthy 4 scores; filled in: [temp_rise_c] ignored: [operator_note]
	// 400 0 site
}

// Require a bearer token on POST /classify and GET /model, and count
// requests with an Observer.
func Example_tokens() {
	m, err := classify.Load(models(nil)[0])
	if err != nil {
		log.Fatal(err)
	}
	var rows atomic.Int64 // the Observer is called from the server's goroutines
	h := endpoint.New(m, endpoint.Options{
		Tokens:     []string{"s3cret-token"}, // in a real service: from a file or the environment, never the source
		Observer:   &endpoint.Observer{Request: func(i endpoint.RequestInfo) { rows.Add(int64(i.Rows)) }},
		RequestLog: slog.New(slog.DiscardHandler),
	})
	srv := httptest.NewServer(h)
	defer srv.Close()
	for _, token := range []string{"", "s3cret-token"} {
		req, _ := http.NewRequest("POST", srv.URL+"/classify", strings.NewReader(`{"rows": [`+goodRow+`]}`))
		if token != "" {
			req.Header.Set("Authorization", "Bearer "+token)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			log.Fatal(err)
		}
		resp.Body.Close()
		fmt.Printf("%d %q\n", resp.StatusCode, resp.Header.Get("WWW-Authenticate"))
	}
	fmt.Println(rows.Load(), "row classified")
	// Output:
	// 401 "Bearer realm=\"rhomb\""
	// 200 ""
	// 1 row classified
}

package endpoint_test

import (
	"encoding/json"
	"fmt"
	"log"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
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
	h := endpoint.New(m, endpoint.Options{MaxRows: 100})
	srv := httptest.NewServer(h) // a real service: http.ListenAndServe(addr, h)
	defer srv.Close()

	resp, err := http.Post(srv.URL+"/classify", "application/json", strings.NewReader(`{"rows": [`+goodRow+`]}`))
	if err != nil {
		log.Fatal(err)
	}
	defer resp.Body.Close()
	var out endpoint.Response
	json.NewDecoder(resp.Body).Decode(&out)
	fmt.Println(resp.StatusCode, out.Predictions[0].Class, len(out.Predictions[0].Scores), "scores")

	resp2, err := http.Post(srv.URL+"/classify", "application/json", strings.NewReader(`{"rows": [{"site": "moon-base"}]}`))
	if err != nil {
		log.Fatal(err)
	}
	defer resp2.Body.Close()
	var e endpoint.Error
	json.NewDecoder(resp2.Body).Decode(&e)
	fmt.Println(resp2.StatusCode, *e.Error.Row, e.Error.Field)
	// Output:
	// 200 healthy 4 scores
	// 400 0 site
}

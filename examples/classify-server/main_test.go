package main

import (
	"context"
	"io"
	"log/slog"
	stdnet "net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify/endpoint"
	"github.com/rhomb/rhomb/net/modelfile"
)

// TestServeReloadShutdown runs the server on loopback: it answers, a
// reload of a broken file keeps it answering with the old model, and
// cancelling (what SIGTERM does) shuts it down cleanly.
func TestServeReloadShutdown(t *testing.T) {
	n, err := net.NewBuilder[float64](2).Dense("h", 3).ReLU("r").Readout("out", 2).Build()
	if err != nil {
		t.Fatal(err)
	}
	n.Init(net.InitSettings{Seed: 1})
	path := filepath.Join(t.TempDir(), "m.model")
	if err := modelfile.Save(path, &modelfile.Model[float64]{Network: n, Classes: []string{"a", "b"}}); err != nil {
		t.Fatal(err)
	}
	ln, err := stdnet.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	reload := make(chan os.Signal, 1)
	done := make(chan error, 1)
	go func() {
		done <- serve(ctx, ln, path, endpoint.Options{Log: slog.New(slog.NewTextHandler(io.Discard, nil))}, reload, 5*time.Second)
	}()
	url := "http://" + ln.Addr().String()
	ask := func() int {
		resp, err := http.Post(url+"/classify", "application/json", strings.NewReader(`{"vectors": [[0.5, -1]]}`))
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	if c := ask(); c != 200 {
		t.Fatalf("status %d", c)
	}
	os.WriteFile(path, []byte("not a model"), 0o644)
	reload <- syscall.SIGHUP
	time.Sleep(50 * time.Millisecond)
	if c := ask(); c != 200 {
		t.Fatalf("after a broken reload: status %d", c)
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Fatal(err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("no shutdown")
	}
}

// Command classify-server serves a rhomb model file over HTTP with package
// endpoint: POST /classify, GET /model, GET /health.
//
//	go run ./examples/classify-server -model pumps.model -addr 127.0.0.1:8080
//	curl -s localhost:8080/classify -d '{"rows": [{"site": "east-tank", "vib_rms_mm_s": 1.5, ...}]}'
//
// SIGHUP reloads the model file: the new file is swapped in only once it
// has fully validated, and a broken file leaves the old model serving
// (the log says why). SIGTERM or Ctrl-C stops accepting connections and
// lets requests in flight finish (up to -grace) before exiting.
//
// A classifier is no safety guarantee: where its output drives alarms,
// interlocks or credit decisions, validate it on your own data, keep a
// person or an independent protection in the loop, and follow the local
// codes and licensed practice.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
)

func main() {
	model := flag.String("model", "", "model `file` to serve (required)")
	addr := flag.String("addr", "127.0.0.1:8080", "listen `address`")
	maxBody := flag.Int64("max-body", 1<<20, "largest request body, `bytes`")
	maxRows := flag.Int("max-rows", 1000, "most rows per request")
	timeout := flag.Duration("timeout", 5*time.Second, "time limit per request")
	inFlight := flag.Int("in-flight", 0, "requests served at once before answering 503 (0: 4·GOMAXPROCS)")
	grace := flag.Duration("grace", 10*time.Second, "how long shutdown waits for requests in flight")
	flag.Parse()
	log := slog.New(slog.NewTextHandler(os.Stderr, nil))
	if *model == "" {
		fmt.Fprintln(os.Stderr, "classify-server: -model names the model file")
		flag.Usage()
		os.Exit(2)
	}
	ln, err := net.Listen("tcp", *addr)
	if err != nil {
		log.Error("listen", "err", err)
		os.Exit(1)
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	o := endpoint.Options{MaxBodyBytes: *maxBody, MaxRows: *maxRows, Timeout: *timeout, MaxInFlight: *inFlight, Log: log}
	if err := serve(ctx, ln, *model, o, hup, *grace); err != nil {
		log.Error("classify-server", "err", err)
		os.Exit(1)
	}
}

// serve serves the model at path on ln until ctx is done, reloading it on
// every value from reload, then shuts down gracefully.
func serve(ctx context.Context, ln net.Listener, path string, o endpoint.Options, reload <-chan os.Signal, grace time.Duration) error {
	m, err := classify.Load(path)
	if err != nil {
		return err
	}
	h := endpoint.New(m, o)
	srv := &http.Server{
		Handler:           h,
		ReadHeaderTimeout: 5 * time.Second,
		IdleTimeout:       60 * time.Second,
	}
	o.Log.Info("serving", "addr", ln.Addr().String(), "model", path, "version", m.Info().Version, "limits", h.String())
	errc := make(chan error, 1)
	go func() { errc <- srv.Serve(ln) }()
	for {
		select {
		case <-reload:
			h.Reload(path) // logs either way; a refused file keeps the old model
		case err := <-errc:
			return err
		case <-ctx.Done():
			o.Log.Info("shutting down: no new connections; waiting for requests in flight", "grace", grace)
			sctx, cancel := context.WithTimeout(context.Background(), grace)
			defer cancel()
			if err := srv.Shutdown(sctx); err != nil {
				return fmt.Errorf("shutdown: %w", err)
			}
			if err := <-errc; !errors.Is(err, http.ErrServerClosed) {
				return err
			}
			o.Log.Info("stopped")
			return nil
		}
	}
}

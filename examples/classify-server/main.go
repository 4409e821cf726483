// Command classify-server serves a rhomb model file over HTTP with package
// endpoint: POST /classify, GET /model, GET /health, and GET /metrics for
// Prometheus.
//
//	go run ./examples/classify-server -model pumps.model
//	curl -s localhost:8080/classify -d '{"rows": [{"site": "east-tank", "vib_rms_mm_s": 1.5, ...}]}'
//
// It listens on 127.0.0.1:8080 unless -addr says otherwise. -tls-cert and
// -tls-key serve HTTPS (TLS 1.2 or later); -token-file, or the variable
// RHOMB_SERVE_TOKENS (comma-separated), makes POST /classify, GET /model
// and GET /metrics require one of the bearer tokens (GET /health stays
// open). Listening beyond loopback without either is logged as a warning.
// Every request is logged as one structured record (-log-format text or
// json).
//
// SIGHUP reloads the model file, the token file and the TLS certificate:
// each is replaced only once the new one has fully loaded, and a broken
// one leaves the old in use (the log says why). SIGTERM or Ctrl-C stops
// accepting connections and lets requests in flight finish (up to -grace)
// before exiting.
//
// docs/serving.md is the operator's guide: the flags, the metrics, and
// running behind a reverse proxy.
//
// A classifier is no safety guarantee: where its output drives alarms,
// interlocks or credit decisions, validate it on your own data, keep a
// person or an independent protection in the loop, and follow the local
// codes and licensed practice.
package main

import (
	"context"
	"crypto/tls"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"os/signal"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
)

// tokenEnv names the environment variable of comma-separated tokens.
const tokenEnv = "RHOMB_SERVE_TOKENS"

// config is the server's settings, from the flags and the environment.
type config struct {
	model, addr     string
	opts            endpoint.Options
	headerTimeout   time.Duration
	idleTimeout     time.Duration
	grace           time.Duration
	tlsCert, tlsKey string
	tokenFile       string
	envTokens       string // the value of RHOMB_SERVE_TOKENS
	logFormat       string
	marginBuckets   []float64
}

// parseFlags reads the command line args and the environment getenv.
func parseFlags(args []string, getenv func(string) string, stderr io.Writer) (config, error) {
	var c config
	fs := flag.NewFlagSet("classify-server", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.StringVar(&c.model, "model", "", "model `file` to serve (required)")
	fs.StringVar(&c.addr, "addr", "127.0.0.1:8080", "listen `address`; beyond loopback, use -tls-cert and tokens")
	fs.Int64Var(&c.opts.MaxBodyBytes, "max-body", 1<<20, "largest request body, `bytes`")
	fs.IntVar(&c.opts.MaxRows, "max-rows", 1000, "most rows per request")
	fs.DurationVar(&c.opts.BodyTimeout, "body-timeout", 10*time.Second, "time allowed for a request body to arrive (408 after)")
	fs.DurationVar(&c.opts.Timeout, "timeout", 5*time.Second, "time allowed to classify a request once its body has arrived (503 after)")
	fs.IntVar(&c.opts.MaxInFlight, "in-flight", 0, "requests classified at once before answering 503 (0: 4·GOMAXPROCS)")
	fs.BoolVar(&c.opts.RefuseUnknownFields, "refuse-unknown", false, "answer 400 to a row field that is none of the model's inputs, instead of ignoring it")
	fs.DurationVar(&c.headerTimeout, "header-timeout", 5*time.Second, "time allowed for a request's headers to arrive")
	fs.DurationVar(&c.idleTimeout, "idle-timeout", 60*time.Second, "how long an idle keep-alive connection is kept open")
	fs.DurationVar(&c.grace, "grace", 10*time.Second, "how long shutdown waits for requests in flight")
	fs.StringVar(&c.tlsCert, "tls-cert", "", "serve HTTPS with the PEM certificate (chain) in `file`; needs -tls-key")
	fs.StringVar(&c.tlsKey, "tls-key", "", "PEM private key `file` of -tls-cert")
	fs.StringVar(&c.tokenFile, "token-file", "", "require a bearer token from `file` (one per line; blank lines and # comments skipped); "+tokenEnv+" adds comma-separated tokens")
	fs.StringVar(&c.logFormat, "log-format", "text", "log record format: `text` or json")
	buckets := fs.String("margin-buckets", joinFloats(defaultMarginBuckets), "upper bounds of the normalized-margin histogram, comma-separated, increasing")
	if err := fs.Parse(args); err != nil {
		return c, err
	}
	c.envTokens = getenv(tokenEnv)
	var err error
	if c.marginBuckets, err = parseFloats(*buckets); err != nil {
		return c, fmt.Errorf("-margin-buckets: %w", err)
	}
	switch {
	case fs.NArg() > 0:
		return c, fmt.Errorf("unexpected argument %q", fs.Arg(0))
	case c.model == "":
		return c, errors.New("-model names the model file to serve")
	case (c.tlsCert == "") != (c.tlsKey == ""):
		return c, errors.New("-tls-cert and -tls-key go together")
	case c.logFormat != "text" && c.logFormat != "json":
		return c, fmt.Errorf("-log-format %q: want text or json", c.logFormat)
	case c.opts.BodyTimeout <= 0 || c.opts.Timeout <= 0 || c.headerTimeout <= 0 || c.idleTimeout <= 0 || c.grace <= 0:
		return c, errors.New("-body-timeout, -timeout, -header-timeout, -idle-timeout and -grace must be positive")
	case c.opts.MaxBodyBytes <= 0 || c.opts.MaxRows <= 0 || c.opts.MaxInFlight < 0:
		return c, errors.New("-max-body and -max-rows must be positive, -in-flight not negative")
	}
	return c, nil
}

func joinFloats(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = strconv.FormatFloat(x, 'g', -1, 64)
	}
	return strings.Join(s, ",")
}

func parseFloats(s string) ([]float64, error) {
	var out []float64
	for _, f := range strings.Split(s, ",") {
		x, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil {
			return nil, fmt.Errorf("%q is not a number", f)
		}
		if len(out) > 0 && x <= out[len(out)-1] {
			return nil, errors.New("the bounds must increase")
		}
		out = append(out, x)
	}
	return out, nil
}

func newLogger(format string, w io.Writer) *slog.Logger {
	if format == "json" {
		return slog.New(slog.NewJSONHandler(w, nil))
	}
	return slog.New(slog.NewTextHandler(w, nil))
}

func main() {
	c, err := parseFlags(os.Args[1:], os.Getenv, os.Stderr)
	if errors.Is(err, flag.ErrHelp) {
		os.Exit(0)
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "classify-server:", err)
		os.Exit(2)
	}
	log := newLogger(c.logFormat, os.Stderr)
	c.opts.Log = log
	ln, err := net.Listen("tcp", c.addr)
	if err != nil {
		log.Error("listen", "err", err)
		os.Exit(1)
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	if err := serve(ctx, ln, c, hup); err != nil {
		log.Error("classify-server", "err", err)
		os.Exit(1)
	}
}

// readTokens returns the tokens of the token file and the environment
// variable. A token file that holds no token is an error, so that a
// mistake in it cannot open the server to everyone.
func readTokens(c config) ([]string, error) {
	var out []string
	if c.tokenFile != "" {
		b, err := os.ReadFile(c.tokenFile)
		if err != nil {
			return nil, fmt.Errorf("token file: %w", err)
		}
		for line := range strings.Lines(string(b)) {
			line = strings.TrimSpace(line)
			if line != "" && !strings.HasPrefix(line, "#") {
				out = append(out, line)
			}
		}
		if len(out) == 0 {
			return nil, fmt.Errorf("token file %s holds no token", c.tokenFile)
		}
	}
	for t := range strings.SplitSeq(c.envTokens, ",") {
		if t = strings.TrimSpace(t); t != "" {
			out = append(out, t)
		}
	}
	return out, nil
}

// certStore holds the TLS certificate, replaced on reload.
type certStore struct {
	certFile, keyFile string
	cur               atomic.Pointer[tls.Certificate]
}

func (s *certStore) load() error {
	kp, err := tls.LoadX509KeyPair(s.certFile, s.keyFile)
	if err != nil {
		return fmt.Errorf("TLS certificate: %w", err)
	}
	s.cur.Store(&kp)
	return nil
}

func (s *certStore) get(*tls.ClientHelloInfo) (*tls.Certificate, error) { return s.cur.Load(), nil }

// writeAllowance is the time, beyond the body and work timeouts, that
// writing a response may take before the connection is cut.
const writeAllowance = 5 * time.Second

// newServer returns the http.Server for h. Its timeouts nest, so that the
// handler's own limits answer first with a JSON error: the headers have
// headerTimeout; the body then has the handler's BodyTimeout (408), so
// ReadTimeout is their sum; the work has Timeout (503); WriteTimeout,
// which net/http counts from the end of the headers, covers body, work
// and writeAllowance.
func newServer(c config, h http.Handler, certs *certStore, log *slog.Logger) *http.Server {
	srv := &http.Server{
		Handler:           h,
		ReadHeaderTimeout: c.headerTimeout,
		ReadTimeout:       c.headerTimeout + c.opts.BodyTimeout,
		WriteTimeout:      c.opts.BodyTimeout + c.opts.Timeout + writeAllowance,
		IdleTimeout:       c.idleTimeout,
		MaxHeaderBytes:    64 << 10,
		ErrorLog:          slog.NewLogLogger(log.Handler(), slog.LevelWarn),
	}
	if certs != nil {
		srv.TLSConfig = &tls.Config{MinVersion: tls.VersionTLS12, GetCertificate: certs.get}
	}
	return srv
}

// exposureWarnings says what is missing when addr is not a loopback
// address: TLS, so that rows, answers and tokens do not cross the network
// in clear text, and tokens, so that not everyone who can reach the port
// can use the model.
func exposureWarnings(addr net.Addr, tls, tokens bool) []string {
	if ta, ok := addr.(*net.TCPAddr); ok && ta.IP.IsLoopback() {
		return nil
	}
	var w []string
	if !tls {
		w = append(w, "listening beyond loopback without TLS: requests, answers and bearer tokens cross the network in clear text (use -tls-cert and -tls-key, or a proxy that terminates TLS on the same host)")
	}
	if !tokens {
		w = append(w, "listening beyond loopback without bearer tokens: anyone who can reach the port can classify and read the model's description (use -token-file or "+tokenEnv+")")
	}
	return w
}

// serve serves the model file of c on ln until ctx is done, reloading
// the model, the tokens and the certificate on every value from reload,
// then shuts down gracefully.
func serve(ctx context.Context, ln net.Listener, c config, reload <-chan os.Signal) error {
	log := c.opts.Log
	if log == nil {
		log = slog.Default()
		c.opts.Log = log
	}
	tokens, err := readTokens(c)
	if err != nil {
		return err
	}
	if c.tokenFile != "" {
		if fi, err := os.Stat(c.tokenFile); err == nil && fi.Mode().Perm()&0o077 != 0 {
			log.Warn("the token file can be read by other users; chmod 600 it", "file", c.tokenFile, "mode", fi.Mode().Perm().String())
		}
	}
	var certs *certStore
	if c.tlsCert != "" {
		certs = &certStore{certFile: c.tlsCert, keyFile: c.tlsKey}
		if err := certs.load(); err != nil {
			return err
		}
	}
	t0 := time.Now()
	m, err := classify.Load(c.model)
	if err != nil {
		return err
	}
	took := time.Since(t0)

	reg := prometheus.NewRegistry()
	met := newMetrics(reg, c.marginBuckets)
	o := c.opts
	o.Observer, o.Tokens = met.observer(), nil
	h := endpoint.New(m, o)
	if err := h.SetTokens(tokens); err != nil {
		return fmt.Errorf("tokens: %w", err)
	}
	met.loaded(m, took)
	scrape := h.Authorize(promhttp.HandlerFor(reg, promhttp.HandlerOpts{ErrorLog: slog.NewLogLogger(log.Handler(), slog.LevelWarn)}))
	mux := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.URL.Path == "/metrics" {
			scrape.ServeHTTP(w, r)
			return
		}
		h.ServeHTTP(w, r)
	})
	srv := newServer(c, mux, certs, log)
	for _, w := range exposureWarnings(ln.Addr(), certs != nil, len(tokens) > 0) {
		log.Warn(w, "addr", ln.Addr().String())
	}
	scheme := "http"
	if certs != nil {
		scheme = "https"
	}
	log.Info("serving", "addr", ln.Addr().String(), "scheme", scheme, "model", c.model, "version", m.Info().Version, "limits", h.String())
	errc := make(chan error, 1)
	go func() {
		if certs != nil {
			errc <- srv.ServeTLS(ln, "", "")
		} else {
			errc <- srv.Serve(ln)
		}
	}()
	for {
		select {
		case <-reload:
			h.Reload(c.model) // logs either way; a refused file keeps the old model
			if c.tokenFile != "" {
				if t, err := readTokens(c); err != nil {
					log.Error("token file refused; the old tokens stay in force", "err", err)
				} else if err := h.SetTokens(t); err != nil {
					log.Error("token file refused; the old tokens stay in force", "err", err)
				} else {
					log.Info("tokens reloaded", "count", len(t))
				}
			}
			if certs != nil {
				if err := certs.load(); err != nil {
					log.Error("certificate refused; the old one stays in use", "err", err)
				} else {
					log.Info("certificate reloaded", "file", c.tlsCert)
				}
			}
		case err := <-errc:
			return err
		case <-ctx.Done():
			log.Info("shutting down: no new connections; waiting for requests in flight", "grace", c.grace)
			sctx, cancel := context.WithTimeout(context.Background(), c.grace)
			defer cancel()
			if err := srv.Shutdown(sctx); err != nil {
				srv.Close()
				return fmt.Errorf("shutdown: requests still running after %v: %w", c.grace, err)
			}
			if err := <-errc; !errors.Is(err, http.ErrServerClosed) {
				return err
			}
			log.Info("stopped")
			return nil
		}
	}
}

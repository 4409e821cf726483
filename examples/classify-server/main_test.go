package main

import (
	"bufio"
	"bytes"
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/json"
	"encoding/pem"
	"errors"
	"io"
	"log/slog"
	"math"
	"math/big"
	stdnet "net"
	"net/http"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// row is one row of the invented pump data, as a client sends it.
const row = `{"site": "river-intake", "vib_rms_mm_s": 1.576, "vib_kurtosis": "2.505", "crest_factor": 3.283,
	"band_1x_ratio": 0.4781, "band_hf_ratio": 0.0887, "temp_rise_c": 20.30,
	"current_imbalance_pct": 1.65, "suction_kpa": 127.0}`

var rowMap = map[string]string{
	"site": "river-intake", "vib_rms_mm_s": "1.576", "vib_kurtosis": "2.505", "crest_factor": "3.283",
	"band_1x_ratio": "0.4781", "band_hf_ratio": "0.0887", "temp_rise_c": "20.30",
	"current_imbalance_pct": "1.65", "suction_kpa": "127.0",
}

// writeModel saves an untrained network (seeded) on the demo data's
// pipeline: the server's behaviour does not depend on what a model
// learned, and two seeds give two models with different versions and
// scores.
func writeModel(t testing.TB, path string, seed uint64, metrics map[string]any) {
	t.Helper()
	split, err := demo.Pumps[float64](600)
	if err != nil {
		t.Fatal(err)
	}
	n, err := net.NewBuilder[float64](split.Train.Features).Dense("h", 8).ReLU("r").Readout("out", split.Train.Outputs).Build()
	if err != nil {
		t.Fatal(err)
	}
	n.Init(net.InitSettings{Rho0: 1, Seed: seed})
	if err := modelfile.Save(path, &modelfile.Model[float64]{Network: n, Pipeline: split.Pipeline, Classes: split.Train.Classes, Metrics: metrics}); err != nil {
		t.Fatal(err)
	}
}

// copyFile puts src's bytes at dst by rename, so that a reload never
// reads half a file.
func copyFile(src, dst string) error {
	b, err := os.ReadFile(src)
	if err != nil {
		return err
	}
	tmp := dst + ".new"
	if err := os.WriteFile(tmp, b, 0o644); err != nil {
		return err
	}
	return os.Rename(tmp, dst)
}

func replaceFile(t testing.TB, src, dst string) {
	t.Helper()
	if err := copyFile(src, dst); err != nil {
		t.Fatal(err)
	}
}

// lockedBuffer is a log sink that the server and the test may use at once.
type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// running is a server started by start.
type running struct {
	base   string // http://127.0.0.1:port or https://…
	addr   string
	client *http.Client
	cancel context.CancelFunc
	reload chan os.Signal
	done   chan error
	logs   *lockedBuffer
}

// testConfig is the configuration the flags give by default, for model.
func testConfig(t testing.TB, model string, args ...string) config {
	t.Helper()
	c, err := parseFlags(append([]string{"-model", model}, args...), func(string) string { return "" }, io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// start serves c on a loopback port (as SIGTERM and SIGHUP would drive it,
// through a context and a channel) and waits until /health answers.
func start(t testing.TB, c config, client *http.Client) *running {
	t.Helper()
	ln, err := stdnet.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	r := &running{addr: ln.Addr().String(), client: client, reload: make(chan os.Signal, 1), done: make(chan error, 1), logs: &lockedBuffer{}}
	if r.client == nil {
		r.client = &http.Client{}
	}
	r.base = "http://" + r.addr
	if c.tlsCert != "" {
		r.base = "https://" + r.addr
	}
	if c.opts.Log == nil {
		c.opts.Log = slog.New(slog.NewTextHandler(r.logs, nil))
	}
	ctx, cancel := context.WithCancel(context.Background())
	r.cancel = cancel
	go func() { r.done <- serve(ctx, ln, c, r.reload) }()
	deadline := time.Now().Add(20 * time.Second)
	for {
		resp, err := r.client.Get(r.base + "/health")
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == 200 {
				return r
			}
		}
		select {
		case err := <-r.done:
			t.Fatalf("the server stopped: %v", err)
		default:
		}
		if time.Now().After(deadline) {
			t.Fatalf("the server did not answer /health: %v", err)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// stop shuts the server down as SIGTERM does and returns serve's error.
func (r *running) stop(t testing.TB) error {
	t.Helper()
	r.cancel()
	select {
	case err := <-r.done:
		return err
	case <-time.After(60 * time.Second):
		t.Fatal("no shutdown within 60 s")
	}
	return nil
}

// call sends one request and returns the status and body.
func (r *running) call(t testing.TB, method, path, body, token string) (int, []byte) {
	t.Helper()
	req, err := http.NewRequest(method, r.base+path, strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := r.client.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp.StatusCode, b
}

// TestServeReloadShutdown runs the server on loopback: it answers, a
// reload of a broken file keeps it answering with the old model, and
// cancelling (what SIGTERM does) shuts it down cleanly.
func TestServeReloadShutdown(t *testing.T) {
	path := filepath.Join(t.TempDir(), "m.model")
	writeModel(t, path, 1, nil)
	r := start(t, testConfig(t, path), nil)
	if c, b := r.call(t, "POST", "/classify", `{"rows": [`+row+`]}`, ""); c != 200 {
		t.Fatalf("status %d: %s", c, b)
	}
	os.WriteFile(path, []byte("not a model"), 0o644)
	r.reload <- syscall.SIGHUP
	waitFor(t, func() bool { return strings.Contains(r.logs.String(), "model file refused") })
	if c, b := r.call(t, "POST", "/classify", `{"rows": [`+row+`]}`, ""); c != 200 {
		t.Fatalf("after a broken reload: status %d: %s", c, b)
	}
	if err := r.stop(t); err != nil {
		t.Fatal(err)
	}
	if _, err := stdnet.DialTimeout("tcp", r.addr, time.Second); err == nil {
		t.Error("the port still accepts connections after shutdown")
	}
}

// waitFor polls cond for up to 20 s.
func waitFor(t testing.TB, cond func() bool) {
	t.Helper()
	for deadline := time.Now().Add(20 * time.Second); !cond(); time.Sleep(5 * time.Millisecond) {
		if time.Now().After(deadline) {
			t.Fatal("condition not met within 20 s")
		}
	}
}

// TestServerTimeouts: the server's timeouts nest around the handler's own
// (so that the handler answers a slow body with its JSON 408 before the
// server cuts the connection), and a client that drips its headers is cut
// off after ReadHeaderTimeout, as net/http documents for that field.
func TestServerTimeouts(t *testing.T) {
	path := filepath.Join(t.TempDir(), "m.model")
	writeModel(t, path, 1, nil)
	c := testConfig(t, path, "-header-timeout", "300ms")
	srv := newServer(c, http.NotFoundHandler(), nil, slog.New(slog.DiscardHandler))
	if srv.ReadHeaderTimeout != 300*time.Millisecond || srv.IdleTimeout <= 0 ||
		srv.ReadTimeout < srv.ReadHeaderTimeout+c.opts.BodyTimeout ||
		srv.WriteTimeout < c.opts.BodyTimeout+c.opts.Timeout {
		t.Errorf("timeouts: header %v, read %v, write %v, idle %v; body %v, work %v",
			srv.ReadHeaderTimeout, srv.ReadTimeout, srv.WriteTimeout, srv.IdleTimeout, c.opts.BodyTimeout, c.opts.Timeout)
	}

	r := start(t, c, nil)
	defer r.stop(t)
	conn, err := stdnet.Dial("tcp", r.addr)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	t0 := time.Now()
	stopDrip := make(chan struct{})
	defer close(stopDrip)
	go func() { // one header byte every 50 ms, never finishing
		hdr := "POST /classify HTTP/1.1\r\nHost: x\r\nX-Slow: " + strings.Repeat("a", 1000)
		for i := range len(hdr) {
			select {
			case <-stopDrip:
				return
			case <-time.After(50 * time.Millisecond):
			}
			if _, err := conn.Write([]byte{hdr[i]}); err != nil {
				return
			}
		}
	}()
	conn.SetReadDeadline(time.Now().Add(20 * time.Second))
	got, err := io.ReadAll(conn)
	var ne stdnet.Error
	if err != nil && !errors.Is(err, syscall.ECONNRESET) || errors.As(err, &ne) && ne.Timeout() {
		t.Fatalf("a client dripping its headers was not cut off: %v (read %q)", err, got)
	}
	// Closed (EOF), perhaps after net/http's plain 400; never served.
	if bytes.Contains(got, []byte(" 200 ")) {
		t.Errorf("a request with unfinished headers was served: %q", got)
	}
	if waited := time.Since(t0); waited < 300*time.Millisecond {
		t.Errorf("cut off after %v, before the header timeout of 300ms", waited)
	}
}

// selfSigned writes a P-256 certificate for 127.0.0.1 and its key as PEM
// files and returns their paths and a pool that trusts the certificate.
func selfSigned(t testing.TB, dir string) (certFile, keyFile string, pool *x509.CertPool) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(time.Now().UnixNano()),
		Subject:      pkix.Name{CommonName: "classify-server test"},
		NotBefore:    time.Now().Add(-time.Minute),
		NotAfter:     time.Now().Add(time.Hour),
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
		IPAddresses:  []stdnet.IP{stdnet.IPv4(127, 0, 0, 1)},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	kb, err := x509.MarshalPKCS8PrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	certFile, keyFile = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	if err := os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "PRIVATE KEY", Bytes: kb}), 0o600); err != nil {
		t.Fatal(err)
	}
	leaf, _ := x509.ParseCertificate(der)
	pool = x509.NewCertPool()
	pool.AddCert(leaf)
	return certFile, keyFile, pool
}

// TestTLSAndTokens runs the real server path with -tls-cert, -tls-key,
// -token-file and RHOMB_SERVE_TOKENS: it speaks TLS 1.2 or later and
// refuses TLS 1.1 (deprecated by RFC 8996); a token from the file or the
// environment passes, a wrong or missing one gets 401 with a Bearer
// challenge (RFC 6750 §3); /health stays open and /metrics needs a token;
// SIGHUP re-reads the token file.
func TestTLSAndTokens(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "m.model")
	writeModel(t, path, 1, nil)
	certFile, keyFile, pool := selfSigned(t, dir)
	tokFile := filepath.Join(dir, "tokens")
	os.WriteFile(tokFile, []byte("# operators\nfile-token-1\n\n  file-token-2  \n"), 0o600)
	c, err := parseFlags([]string{"-model", path, "-tls-cert", certFile, "-tls-key", keyFile, "-token-file", tokFile},
		func(k string) string {
			if k == tokenEnv {
				return " env-token-1, env-token-2 ,"
			}
			return ""
		}, io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	client := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}}
	r := start(t, c, client)

	resp, err := client.Get(r.base + "/health")
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.TLS == nil || resp.TLS.Version < tls.VersionTLS12 || resp.StatusCode != 200 {
		t.Fatalf("/health over TLS: %d, TLS %+v", resp.StatusCode, resp.TLS)
	}
	old, err := tls.Dial("tcp", r.addr, &tls.Config{RootCAs: pool, MinVersion: tls.VersionTLS10, MaxVersion: tls.VersionTLS11})
	if err == nil {
		old.Close()
		t.Error("a TLS 1.1 handshake succeeded")
	}
	// Plain HTTP on the TLS port is not served: net/http answers it 400.
	if resp, err := http.Get("http://" + r.addr + "/health"); err == nil {
		resp.Body.Close()
		if resp.StatusCode != 400 {
			t.Errorf("plain HTTP on the TLS port: %d; want net/http's 400", resp.StatusCode)
		}
	}

	body := `{"rows": [` + row + `]}`
	// HTTP/2 is offered over TLS (ALPN "h2"), and /classify answers on it.
	h2 := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}, ForceAttemptHTTP2: true}}
	req, _ := http.NewRequest("POST", r.base+"/classify", strings.NewReader(body))
	req.Header.Set("Authorization", "Bearer env-token-2")
	if resp, err := h2.Do(req); err != nil {
		t.Error(err)
	} else {
		resp.Body.Close()
		if resp.ProtoMajor != 2 || resp.StatusCode != 200 {
			t.Errorf("over HTTP/2: %s %d", resp.Proto, resp.StatusCode)
		}
	}
	for _, tc := range []struct {
		method, path, token string
		status              int
	}{
		{"POST", "/classify", "", 401},
		{"POST", "/classify", "wrong-token", 401},
		{"POST", "/classify", "file-token-1", 200},
		{"POST", "/classify", "file-token-2", 200},
		{"POST", "/classify", "env-token-1", 200},
		{"POST", "/classify", "env-token-2", 200},
		{"GET", "/model", "", 401},
		{"GET", "/model", "env-token-1", 200},
		{"GET", "/metrics", "", 401},
		{"GET", "/metrics", "file-token-1", 200},
		{"GET", "/health", "", 200},
	} {
		if code, b := r.call(t, tc.method, tc.path, body, tc.token); code != tc.status {
			t.Errorf("%s %s with token %q: %d; want %d: %s", tc.method, tc.path, tc.token, code, tc.status, b)
		}
	}

	// A new token file takes effect on SIGHUP; an empty one is refused.
	os.WriteFile(tokFile, []byte("file-token-3\n"), 0o600)
	r.reload <- syscall.SIGHUP
	waitFor(t, func() bool { c, _ := r.call(t, "GET", "/model", "", "file-token-3"); return c == 200 })
	if code, _ := r.call(t, "GET", "/model", "", "file-token-1"); code != 401 {
		t.Errorf("a token removed from the file still works: %d", code)
	}
	os.WriteFile(tokFile, []byte("# nobody\n"), 0o600)
	r.reload <- syscall.SIGHUP
	waitFor(t, func() bool { return strings.Contains(r.logs.String(), "holds no token") })
	if code, _ := r.call(t, "GET", "/model", "", ""); code != 401 {
		t.Errorf("an empty token file opened the server: %d", code)
	}
	if err := r.stop(t); err != nil {
		t.Fatal(err)
	}
}

// TestExposureWarnings: loopback addresses (RFC 1122 §3.2.1.3: 127/8;
// RFC 4291 §2.5.3: ::1) get no warning; any other address gets one for
// each of TLS and tokens that is missing.
func TestExposureWarnings(t *testing.T) {
	for _, tc := range []struct {
		ip          string
		tls, tokens bool
		want        int
	}{
		{"127.0.0.1", false, false, 0},
		{"127.3.2.1", false, false, 0},
		{"::1", false, false, 0},
		{"0.0.0.0", false, false, 2},
		{"::", true, false, 1},
		{"192.0.2.7", false, true, 1}, // RFC 5737 documentation address
		{"192.0.2.7", true, true, 0},
	} {
		got := exposureWarnings(&stdnet.TCPAddr{IP: stdnet.ParseIP(tc.ip), Port: 8080}, tc.tls, tc.tokens)
		if len(got) != tc.want {
			t.Errorf("%s tls=%v tokens=%v: %d warnings %q; want %d", tc.ip, tc.tls, tc.tokens, len(got), got, tc.want)
		}
	}
}

// TestParseFlags: the defaults listen on loopback with TLS and tokens off,
// and bad combinations are refused.
func TestParseFlags(t *testing.T) {
	c, err := parseFlags([]string{"-model", "m.model"}, func(string) string { return "" }, io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	host, _, err := stdnet.SplitHostPort(c.addr)
	if err != nil || !stdnet.ParseIP(host).IsLoopback() || c.tlsCert != "" || c.tokenFile != "" || c.opts.RefuseUnknownFields {
		t.Errorf("defaults: %+v", c)
	}
	for _, args := range [][]string{
		{},
		{"-model", "m", "-tls-cert", "c.pem"},
		{"-model", "m", "-tls-key", "k.pem"},
		{"-model", "m", "-log-format", "xml"},
		{"-model", "m", "-timeout", "0s"},
		{"-model", "m", "-body-timeout", "-1s"},
		{"-model", "m", "-margin-buckets", "1,0.5"},
		{"-model", "m", "-margin-buckets", "a"},
		{"-model", "m", "extra"},
	} {
		if _, err := parseFlags(args, func(string) string { return "" }, io.Discard); err == nil {
			t.Errorf("%q accepted", args)
		}
	}
	c, err = parseFlags([]string{"-model", "m", "-refuse-unknown", "-margin-buckets", "0.1, 1,10"}, func(string) string { return "" }, io.Discard)
	if err != nil || !c.opts.RefuseUnknownFields || !slices.Equal(c.marginBuckets, []float64{0.1, 1, 10}) {
		t.Errorf("-refuse-unknown -margin-buckets: %+v %v", c, err)
	}
}

// scrape fetches /metrics and returns each series' value by its text
// before the value, e.g. `rhomb_serve_requests_total{code="200",route="/classify"}`.
func (r *running) scrape(t testing.TB, token string) map[string]float64 {
	t.Helper()
	code, b := r.call(t, "GET", "/metrics", "", token)
	if code != 200 {
		t.Fatalf("/metrics: %d", code)
	}
	out := map[string]float64{}
	sc := bufio.NewScanner(bytes.NewReader(b))
	for sc.Scan() {
		line := sc.Text()
		if line == "" || line[0] == '#' {
			continue
		}
		i := strings.LastIndexByte(line, ' ')
		v, err := strconv.ParseFloat(line[i+1:], 64)
		if err != nil {
			t.Fatalf("metrics line %q: %v", line, err)
		}
		out[line[:i]] = v
	}
	return out
}

// TestMetrics sends known requests and reloads, then checks /metrics
// against them: counts by route and status, rows, the margin histogram
// (whose buckets are cumulative, per the Prometheus text exposition
// format), the model version series, reload results, and the training
// summary gauges taken from the model file's metrics.
func TestMetrics(t *testing.T) {
	dir := t.TempDir()
	path, other := filepath.Join(dir, "m.model"), filepath.Join(dir, "other.model")
	writeModel(t, path, 1, map[string]any{"margin_min": 0.0125, "margin_mean": 0.25, "rho": 3.5, "train_accuracy": 0.9})
	writeModel(t, other, 2, nil)
	ma, err := classify.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	mb, err := classify.Load(other)
	if err != nil {
		t.Fatal(err)
	}
	r := start(t, testConfig(t, path), nil)
	defer r.stop(t)

	var margins []float64
	for _, rows := range []int{1, 2, 3} {
		body := `{"rows": [` + strings.TrimSuffix(strings.Repeat(row+",", rows), ",") + `]}`
		code, b := r.call(t, "POST", "/classify", body, "")
		var resp endpoint.Response
		if err := json.Unmarshal(b, &resp); code != 200 || err != nil {
			t.Fatalf("status %d: %s", code, b)
		}
		for _, a := range resp.Answers {
			margins = append(margins, a.Margin)
		}
	}
	r.call(t, "POST", "/classify", `{"rows": [`, "")
	r.call(t, "GET", "/nowhere", "", "")
	r.call(t, "GET", "/model", "", "")

	m := r.scrape(t, "")
	for series, want := range map[string]float64{
		`rhomb_serve_requests_total{code="200",route="/classify"}`:              3,
		`rhomb_serve_requests_total{code="400",route="/classify"}`:              1,
		`rhomb_serve_requests_total{code="404",route="other"}`:                  1,
		`rhomb_serve_requests_total{code="200",route="/model"}`:                 1,
		`rhomb_serve_request_duration_seconds_count{route="/classify"}`:         4,
		`rhomb_serve_rows_classified_total`:                                     6,
		`rhomb_serve_margin_count`:                                              6,
		`rhomb_serve_margin_bucket{le="+Inf"}`:                                  6,
		`rhomb_serve_model_info{version="` + ma.Info().Version + `"}`:           1,
		`rhomb_serve_model_reloads_total{result="ok"}`:                          0,
		`rhomb_serve_model_reloads_total{result="failed"}`:                      0,
		`rhomb_serve_training_margin{stat="min"}`:                               0.0125,
		`rhomb_serve_training_margin{stat="mean"}`:                              0.25,
		`rhomb_serve_training_rho`:                                              3.5,
		`rhomb_serve_request_duration_seconds_bucket{route="/model",le="+Inf"}`: 1,
	} {
		if got, ok := m[series]; !ok || got != want {
			t.Errorf("%s = %v (present %v); want %v", series, got, ok, want)
		}
	}
	// The sum is of the same six margins added in the same order; allow
	// six roundings in case the order differs (6·2⁻⁵³ relative).
	var sum float64
	for _, x := range margins {
		sum += x
	}
	if got := m["rhomb_serve_margin_sum"]; math.Abs(got-sum) > 6*0x1p-53*sum {
		t.Errorf("margin sum %v; the answers' margins add to %v", got, sum)
	}
	for _, le := range defaultMarginBuckets {
		n := 0
		for _, x := range margins {
			if x <= le {
				n++
			}
		}
		key := `rhomb_serve_margin_bucket{le="` + strconv.FormatFloat(le, 'g', -1, 64) + `"}`
		if got, ok := m[key]; !ok || got != float64(n) {
			t.Errorf("%s = %v; %d of the margins %v are ≤ %v", key, got, n, margins, le)
		}
	}
	if m["rhomb_serve_model_load_duration_seconds"] <= 0 || m["rhomb_serve_model_loaded_timestamp_seconds"] <= 0 {
		t.Errorf("load time %v, loaded at %v", m["rhomb_serve_model_load_duration_seconds"], m["rhomb_serve_model_loaded_timestamp_seconds"])
	}

	// A broken file, then another model: one failure, one success, and the
	// version series follows the model; the new file records no training
	// summary, so those gauges go.
	os.WriteFile(path, []byte("broken"), 0o644)
	r.reload <- syscall.SIGHUP
	waitFor(t, func() bool { return r.scrape(t, "")[`rhomb_serve_model_reloads_total{result="failed"}`] == 1 })
	replaceFile(t, other, path)
	r.reload <- syscall.SIGHUP
	waitFor(t, func() bool { return r.scrape(t, "")[`rhomb_serve_model_reloads_total{result="ok"}`] == 1 })
	m = r.scrape(t, "")
	for series := range m {
		if strings.HasPrefix(series, "rhomb_serve_model_info") && series != `rhomb_serve_model_info{version="`+mb.Info().Version+`"}` {
			t.Errorf("stale version series %s", series)
		}
		if strings.HasPrefix(series, "rhomb_serve_training_") {
			t.Errorf("training summary %s of the old model still shown", series)
		}
	}
	if m[`rhomb_serve_model_info{version="`+mb.Info().Version+`"}`] != 1 {
		t.Errorf("no version series for the new model %s", mb.Info().Version)
	}
}

// TestMetricsLint checks the metric names, types and help texts against
// the Prometheus conventions, as the client library's linter reads them.
func TestMetricsLint(t *testing.T) {
	reg := prometheus.NewRegistry()
	met := newMetrics(reg, defaultMarginBuckets)
	met.request(endpoint.RequestInfo{Route: "/classify", Status: 200, Rows: 1, Latency: time.Millisecond, Margins: []float64{0.5}})
	problems, err := testutil.GatherAndLint(reg)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		if strings.HasPrefix(p.Metric, "rhomb_") {
			t.Errorf("%s: %s", p.Metric, p.Text)
		}
	}
}

func TestReadTokens(t *testing.T) {
	dir := t.TempDir()
	f := filepath.Join(dir, "t")
	os.WriteFile(f, []byte("# comment\r\n a-token \r\n\r\nb-token"), 0o600)
	got, err := readTokens(config{tokenFile: f, envTokens: "c-token,,d-token "})
	if err != nil || !slices.Equal(got, []string{"a-token", "b-token", "c-token", "d-token"}) {
		t.Errorf("tokens %q, %v", got, err)
	}
	os.WriteFile(f, []byte("\n# only a comment\n"), 0o600)
	if _, err := readTokens(config{tokenFile: f}); err == nil {
		t.Error("a token file with no token was accepted")
	}
	if got, err := readTokens(config{}); err != nil || len(got) != 0 {
		t.Errorf("no file, no variable: %q %v", got, err)
	}
	if _, err := readTokens(config{tokenFile: filepath.Join(dir, "absent")}); err == nil {
		t.Error("a missing token file was accepted")
	}
}

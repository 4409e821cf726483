package endpoint_test

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"math/big"
	stdnet "net"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/rhomb/rhomb/net/classify/endpoint"
)

// selfSigned makes a P-256 certificate for 127.0.0.1, valid for an hour,
// and returns it with a pool that trusts it.
func selfSigned(t testing.TB) (tls.Certificate, *x509.CertPool) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1),
		Subject:      pkix.Name{CommonName: "endpoint test"},
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
	leaf, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	pool := x509.NewCertPool()
	pool.AddCert(leaf)
	return tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key, Leaf: leaf}, pool
}

// TestTokensOverTLS serves over TLS with two bearer tokens. Per RFC 6750
// §3 a refused request gets 401 with a WWW-Authenticate: Bearer
// challenge, without an error code when it sent no credentials (§3.1) and
// with error="invalid_token" when its token is wrong; the scheme name is
// matched without regard to case (RFC 9110 §11.1). GET /health needs no
// token. Every refusal has the JSON error body.
func TestTokensOverTLS(t *testing.T) {
	h := endpoint.New(load(t, models(t)[0]), endpoint.Options{Tokens: []string{"alpha-token-1", "beta.token/2=="}, Log: quiet})
	cert, pool := selfSigned(t)
	srv := httptest.NewUnstartedServer(h)
	srv.TLS = &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	srv.StartTLS()
	defer srv.Close()
	srv.Client().Transport.(*http.Transport).TLSClientConfig = &tls.Config{RootCAs: pool}
	body := `{"rows": [` + goodRow + `]}`
	for _, tc := range []struct {
		name, method, path, auth string
		status                   int
		errorCode                string // the challenge's error= parameter, for 401
	}{
		{"no token", "POST", "/classify", "", 401, ""},
		{"wrong token", "POST", "/classify", "Bearer alpha-token-2", 401, "invalid_token"},
		{"token prefix", "POST", "/classify", "Bearer alpha-token", 401, "invalid_token"},
		{"other scheme", "POST", "/classify", "Basic YWxwaGE6dG9rZW4=", 401, ""},
		{"empty bearer", "GET", "/model", "Bearer ", 401, ""},
		{"first token", "POST", "/classify", "Bearer alpha-token-1", 200, ""},
		{"second token", "POST", "/classify", "Bearer beta.token/2==", 200, ""},
		{"scheme in lower case", "POST", "/classify", "bearer alpha-token-1", 200, ""},
		{"model without token", "GET", "/model", "", 401, ""},
		{"model with token", "GET", "/model", "Bearer beta.token/2==", 200, ""},
		{"health without token", "GET", "/health", "", 200, ""},
	} {
		hdr := map[string]string{}
		if tc.auth != "" {
			hdr["Authorization"] = tc.auth
		}
		b := ""
		if tc.method == "POST" {
			b = body
		}
		code, rh, out := do(t, srv, tc.method, tc.path, b, hdr)
		if code != tc.status {
			t.Errorf("%s: status %d; want %d", tc.name, code, tc.status)
			continue
		}
		if code != 401 {
			continue
		}
		ch := rh.Get("WWW-Authenticate")
		if !strings.HasPrefix(ch, "Bearer ") || jsonError(out) == "" {
			t.Errorf("%s: WWW-Authenticate %q, body %v; want a Bearer challenge and a JSON error", tc.name, ch, out)
		}
		if got := strings.Contains(ch, "error="); got != (tc.errorCode != "") || !strings.Contains(ch, tc.errorCode) {
			t.Errorf("%s: challenge %q; want error code %q", tc.name, ch, tc.errorCode)
		}
	}
}

// TestSetTokens: tokens can be replaced while serving; the old ones stop
// working at once; a token outside the b64token syntax (RFC 6750 §2.1) is
// refused and the tokens in force are kept; no tokens turns the check off.
func TestSetTokens(t *testing.T) {
	h := endpoint.New(load(t, models(t)[0]), endpoint.Options{Tokens: []string{"old-token"}, Log: quiet})
	srv := httptest.NewServer(h)
	defer srv.Close()
	status := func(token string) int {
		hdr := map[string]string{}
		if token != "" {
			hdr["Authorization"] = "Bearer " + token
		}
		code, _, _ := do(t, srv, "GET", "/model", "", hdr)
		return code
	}
	if status("old-token") != 200 || status("") != 401 {
		t.Fatal("the initial token")
	}
	if err := h.SetTokens([]string{"new-token"}); err != nil {
		t.Fatal(err)
	}
	if status("old-token") != 401 || status("new-token") != 200 {
		t.Error("after SetTokens the old token should fail and the new pass")
	}
	for _, bad := range []string{"", "has space", "==", "tab\there", "é"} {
		if err := h.SetTokens([]string{"fine", bad}); err == nil {
			t.Errorf("token %q was accepted", bad)
		}
	}
	if status("new-token") != 200 || status("fine") != 401 {
		t.Error("a refused SetTokens changed the tokens")
	}
	if err := h.SetTokens(nil); err != nil || status("") != 200 {
		t.Errorf("no tokens: %v, status %d; want the check off", err, status(""))
	}
	defer func() {
		if recover() == nil {
			t.Error("New accepted an invalid token")
		}
	}()
	endpoint.New(h.Model(), endpoint.Options{Tokens: []string{"has space"}})
}

// TestAuthorize: a route a server adds beside the handler's own takes the
// same check.
func TestAuthorize(t *testing.T) {
	h := endpoint.New(load(t, models(t)[0]), endpoint.Options{Tokens: []string{"scrape-token"}, Log: quiet})
	inner := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { w.Write([]byte(`{"ok": true}`)) })
	srv := httptest.NewServer(h.Authorize(inner))
	defer srv.Close()
	if code, hdr, out := do(t, srv, "GET", "/metrics", "", nil); code != 401 || hdr.Get("WWW-Authenticate") == "" || jsonError(out) == "" {
		t.Errorf("without a token: %d %v", code, out)
	}
	if code, _, out := do(t, srv, "GET", "/metrics", "", map[string]string{"Authorization": "Bearer scrape-token"}); code != 200 || out["ok"] != true {
		t.Errorf("with the token: %d %v", code, out)
	}
}

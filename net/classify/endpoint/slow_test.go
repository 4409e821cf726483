package endpoint_test

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	stdnet "net"
	"net/http"
	"net/http/httptest"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/rhomb/rhomb/net/classify/endpoint"
)

// dripClient opens a raw connection to addr and sends POST /classify with
// a body that arrives one byte every `every`, the way a slow or hostile
// client sends. The drip runs in the background until the body is sent,
// stop is closed, or a write fails.
func dripClient(t testing.TB, addr, body string, every time.Duration, stop <-chan struct{}) stdnet.Conn {
	t.Helper()
	c, err := stdnet.Dial("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := fmt.Fprintf(c, "POST /classify HTTP/1.1\r\nHost: %s\r\nContent-Type: application/json\r\nContent-Length: %d\r\n\r\n", addr, len(body)); err != nil {
		t.Fatal(err)
	}
	go func() {
		tick := time.NewTicker(every)
		defer tick.Stop()
		for i := range len(body) {
			select {
			case <-stop:
				return
			case <-tick.C:
			}
			if _, err := c.Write([]byte{body[i]}); err != nil {
				return
			}
		}
	}()
	return c
}

// TestSlowClientsDoNotStarve: twice as many slow clients as in-flight
// places, each dripping its body a byte at a time, must not make ordinary
// requests fail. Before the fix the body was read inside an in-flight
// place, so 0 of 20 ordinary requests succeeded here.
func TestSlowClientsDoNotStarve(t *testing.T) {
	m := load(t, models(t)[0])
	h := endpoint.New(m, endpoint.Options{MaxInFlight: 4, BodyTimeout: 30 * time.Second, Log: quiet})
	srv := httptest.NewServer(h) // 127.0.0.1 only
	defer srv.Close()
	addr := strings.TrimPrefix(srv.URL, "http://")
	stop := make(chan struct{})
	defer close(stop)
	body := `{"rows": [` + goodRow + `]}`
	for range 8 {
		c := dripClient(t, addr, body, 100*time.Millisecond, stop)
		defer c.Close()
	}
	time.Sleep(500 * time.Millisecond) // every slow client has sent its headers and a few bytes
	ok := 0
	for range 20 {
		resp, err := http.Post(srv.URL+"/classify", "application/json", strings.NewReader(body))
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode == 200 {
			ok++
		}
	}
	if ok != 20 {
		t.Fatalf("%d of 20 ordinary requests succeeded beside 8 slow clients", ok)
	}
	// The slow clients, still sending, hold no in-flight place.
	resp, err := http.Get(srv.URL + "/health")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var hs struct {
		InFlight int `json:"in_flight"`
	}
	if err := json.NewDecoder(resp.Body).Decode(&hs); err != nil || hs.InFlight != 0 {
		t.Fatalf("in flight beside 8 slow clients: %d (%v); want 0", hs.InFlight, err)
	}
}

// TestSlowBodyTimesOut: a body that has not arrived within BodyTimeout
// gets 408 Request Timeout with the JSON error, and the server closes the
// connection (RFC 9110 §15.5.9: the server did not receive a complete
// request in time, and SHOULD send the "close" connection option).
func TestSlowBodyTimesOut(t *testing.T) {
	m := load(t, models(t)[0])
	h := endpoint.New(m, endpoint.Options{BodyTimeout: 300 * time.Millisecond, Log: quiet})
	srv := httptest.NewServer(h)
	defer srv.Close()
	stop := make(chan struct{})
	defer close(stop)
	c := dripClient(t, strings.TrimPrefix(srv.URL, "http://"), `{"rows": [`+goodRow+`]}`, 50*time.Millisecond, stop)
	defer c.Close()
	c.SetReadDeadline(time.Now().Add(20 * time.Second)) // generous: a loaded machine
	br := bufio.NewReader(c)
	t0 := time.Now()
	resp, err := http.ReadResponse(br, nil)
	if err != nil {
		t.Fatal(err)
	}
	waited := time.Since(t0)
	var e endpoint.Error
	derr := json.NewDecoder(resp.Body).Decode(&e)
	resp.Body.Close()
	if resp.StatusCode != http.StatusRequestTimeout || derr != nil || e.Error.Message == "" || !resp.Close {
		t.Fatalf("status %d, JSON error %q (%v), close %v; want 408 with a JSON error and Connection: close", resp.StatusCode, e.Error.Message, derr, resp.Close)
	}
	if waited < 300*time.Millisecond {
		t.Errorf("answered after %v, before the body timeout of 300ms", waited)
	}
	// Closed: EOF, or a reset when the server closed with the client's
	// bytes still unread (as TCP does, RFC 9293 §3.6.1).
	if _, err := br.ReadByte(); err != io.EOF && !errors.Is(err, syscall.ECONNRESET) {
		t.Errorf("after the 408 the connection gave %v; want it closed (EOF or reset)", err)
	}
}

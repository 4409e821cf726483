package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	stdnet "net"
	"net/http"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
)

// dripPost sends POST /classify on a new connection: the headers and the
// first `head` bytes of body at once, then the rest one byte every
// `every`, and returns the response's status and decoded body. started,
// if not nil, is closed once the first part is sent.
func dripPost(addr, body string, head int, every time.Duration, started chan<- struct{}) (int, endpoint.Response, error) {
	var resp endpoint.Response
	c, err := stdnet.Dial("tcp", addr)
	if err != nil {
		return 0, resp, err
	}
	defer c.Close()
	c.SetDeadline(time.Now().Add(60 * time.Second))
	if _, err := fmt.Fprintf(c, "POST /classify HTTP/1.1\r\nHost: %s\r\nContent-Type: application/json\r\nContent-Length: %d\r\n\r\n%s", addr, len(body), body[:head]); err != nil {
		return 0, resp, err
	}
	if started != nil {
		close(started)
	}
	for i := head; i < len(body); i++ {
		time.Sleep(every)
		if _, err := c.Write([]byte{body[i]}); err != nil {
			return 0, resp, err
		}
	}
	r, err := http.ReadResponse(bufio.NewReader(c), nil)
	if err != nil {
		return 0, resp, err
	}
	defer r.Body.Close()
	if r.StatusCode == 200 {
		err = json.NewDecoder(r.Body).Decode(&resp)
	}
	return r.StatusCode, resp, err
}

// TestLoad is the bounded loopback load test of the whole server: steady
// load from several clients, two model swaps and a refused broken file
// (SIGHUP path) during it, slow clients dripping their bodies beside it,
// and a graceful shutdown (the SIGTERM path) with requests still in
// flight. It is bounded: at most 8000 steady requests and 20 s of steady
// load, about 3 s in all on an idle 2-core machine. It asserts correctness only: every request gets 200 or a 503
// from the in-flight limit; every answer is, bit for bit, the answer of
// the model it names, and that model is one of the two; the slow clients
// and the requests in flight at shutdown are answered; shutdown returns
// without error. Request counts, p50/p99 latency and peak heap are logged.
func TestLoad(t *testing.T) {
	const (
		steady   = 6    // clients sending one request after another
		slow     = 3    // clients dripping their bodies, two bodies each
		requests = 8000 // at most, from the steady clients, 4 rows each
		timeCap  = 20 * time.Second
		pause    = 2 * time.Millisecond // between a steady client's requests
	)
	dir := t.TempDir()
	files := [2]string{filepath.Join(dir, "a.model"), filepath.Join(dir, "b.model")}
	want := map[string][]float64{} // model version → scores of row
	for i, f := range files {
		writeModel(t, f, uint64(i+1), nil)
		m, err := classify.Load(f)
		if err != nil {
			t.Fatal(err)
		}
		a, err := m.ClassifyMap(nil, rowMap)
		if err != nil {
			t.Fatal(err)
		}
		want[m.Info().Version] = slices.Clone(a.Scores)
	}
	if len(want) != 2 {
		t.Fatal("the two models have one version")
	}
	path := filepath.Join(dir, "serving.model")
	replaceFile(t, files[0], path)
	// As many in-flight places as slow clients: if the slow clients held
	// places while sending (the defect this guards against), the steady
	// clients would find none free for most of the run.
	c := testConfig(t, path, "-in-flight", fmt.Sprint(slow), "-body-timeout", "40s", "-timeout", "30s", "-grace", "40s")
	c.opts.Log = slog.New(slog.DiscardHandler)
	r := start(t, c, &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: steady}})

	body := `{"rows": [` + strings.Repeat(row+",", 3) + row + `]}`
	check := func(what string, resp endpoint.Response) error {
		w, ok := want[resp.ModelVersion]
		if !ok {
			return fmt.Errorf("%s: answered by model %q, neither of the two", what, resp.ModelVersion)
		}
		if len(resp.Answers) != 4 {
			return fmt.Errorf("%s: %d answers for 4 rows", what, len(resp.Answers))
		}
		for _, a := range resp.Answers {
			if !slices.Equal(a.Scores, w) {
				return fmt.Errorf("%s: scores %v are not model %s's %v", what, a.Scores, resp.ModelVersion, w)
			}
		}
		return nil
	}

	var peak atomic.Uint64
	sampling := make(chan struct{})
	var sampler sync.WaitGroup
	sampler.Go(func() {
		var ms runtime.MemStats
		for {
			runtime.ReadMemStats(&ms)
			if ms.HeapAlloc > peak.Load() {
				peak.Store(ms.HeapAlloc)
			}
			select {
			case <-sampling:
				return
			case <-time.After(50 * time.Millisecond):
			}
		}
	})

	start := time.Now()
	var next, ok, overloaded atomic.Int64
	lat := make([]time.Duration, requests)
	var mu sync.Mutex
	versions := map[string]int{}
	var failures []string
	fail := func(s string) {
		mu.Lock()
		defer mu.Unlock()
		if len(failures) < 20 {
			failures = append(failures, s)
		}
	}

	// The steady load runs until the slow clients are done (or the count
	// or time cap). Swaps to the second model and back, with a broken
	// file refused between them, come 0.3, 0.6 and 0.9 s into it: the
	// slow clients take over 2 s.
	slowFinished := make(chan struct{})
	var swaps sync.WaitGroup
	swaps.Go(func() {
		for k, step := range []string{files[1], "", files[0]} {
			time.Sleep(time.Until(start.Add(time.Duration(k+1) * 300 * time.Millisecond)))
			var err error
			if step == "" {
				err = writeBroken(path)
			} else {
				err = copyFile(step, path)
			}
			if err != nil {
				fail(err.Error())
			}
			r.reload <- syscall.SIGHUP
			time.Sleep(20 * time.Millisecond) // let the reload run before the next file lands
		}
	})

	var slowDone sync.WaitGroup
	var slowOK atomic.Int64
	for i := range slow {
		slowDone.Go(func() {
			// Over 1 s per body; each client sends two in turn.
			for j := range 2 {
				code, resp, err := dripPost(r.addr, body, len(body)-100, 10*time.Millisecond, nil)
				what := fmt.Sprintf("slow client %d, body %d", i, j)
				switch {
				case err != nil:
					fail(what + ": " + err.Error())
				case code == 503:
					overloaded.Add(1)
				case code != 200:
					fail(fmt.Sprintf("%s: status %d", what, code))
				default:
					if err := check(what, resp); err != nil {
						fail(err.Error())
					} else {
						slowOK.Add(1)
					}
				}
			}
		})
	}

	var clients sync.WaitGroup
	for range steady {
		clients.Go(func() {
			for {
				select {
				case <-slowFinished:
					return
				case <-time.After(pause):
				}
				i := next.Add(1) - 1
				if i >= requests || time.Since(start) > timeCap {
					return
				}
				t0 := time.Now()
				resp, err := r.client.Post(r.base+"/classify", "application/json", strings.NewReader(body))
				if err != nil {
					fail(fmt.Sprintf("request %d: %v", i, err))
					continue
				}
				var out endpoint.Response
				derr := json.NewDecoder(resp.Body).Decode(&out)
				io.Copy(io.Discard, resp.Body)
				resp.Body.Close()
				lat[i] = time.Since(t0)
				switch {
				case resp.StatusCode == 503:
					overloaded.Add(1)
					time.Sleep(5 * time.Millisecond) // as Retry-After asks, if less patiently
				case resp.StatusCode != 200 || derr != nil:
					fail(fmt.Sprintf("request %d: status %d, %v", i, resp.StatusCode, derr))
				default:
					if err := check(fmt.Sprintf("request %d", i), out); err != nil {
						fail(err.Error())
						continue
					}
					ok.Add(1)
					mu.Lock()
					versions[out.ModelVersion]++
					mu.Unlock()
				}
			}
		})
	}
	slowDone.Wait()
	close(slowFinished)
	clients.Wait()
	steadyTime := time.Since(start)
	swaps.Wait()

	// Shutdown with two requests in flight: their bodies are still
	// arriving when the server is told to stop.
	type result struct {
		code int
		resp endpoint.Response
		err  error
	}
	inFlight := make(chan result, 2)
	for range 2 {
		started := make(chan struct{})
		go func() {
			code, resp, err := dripPost(r.addr, body, len(body)-20, 25*time.Millisecond, started)
			inFlight <- result{code, resp, err}
		}()
		<-started
	}
	time.Sleep(100 * time.Millisecond) // the server has read their headers
	shutdownStart := time.Now()
	r.cancel()
	for k := range 2 {
		res := <-inFlight
		if res.err != nil || res.code != 200 {
			fail(fmt.Sprintf("request in flight at shutdown %d: status %d, %v", k, res.code, res.err))
		} else if err := check("request in flight at shutdown", res.resp); err != nil {
			fail(err.Error())
		}
	}
	select {
	case err := <-r.done:
		if err != nil {
			fail("shutdown: " + err.Error())
		}
	case <-time.After(60 * time.Second):
		fail("no shutdown within 60 s")
	}
	shutdownTime := time.Since(shutdownStart)
	close(sampling)
	sampler.Wait()

	done := ok.Load() + overloaded.Load()
	var got []time.Duration
	for _, d := range lat {
		if d > 0 {
			got = append(got, d)
		}
	}
	slices.Sort(got)
	p50, p99 := time.Duration(0), time.Duration(0)
	if len(got) > 0 {
		p50, p99 = got[len(got)/2], got[len(got)*99/100]
	}
	t.Logf("steady: %d requests (4 rows each) from %d clients pausing %v between requests, over %v beside %d slow clients: %d answered, %d refused 503 by the in-flight limit; latency p50 %v, p99 %v",
		done, steady, pause, steadyTime.Round(time.Millisecond), slow, ok.Load(), overloaded.Load(), p50, p99)
	t.Logf("slow clients: %d of %d bodies answered; answers by model version %v; shutdown with 2 requests in flight took %v; peak heap %d KiB; %d errors",
		slowOK.Load(), 2*slow, versions, shutdownTime.Round(time.Millisecond), peak.Load()>>10, len(failures))

	for _, f := range failures {
		t.Error(f)
	}
	if ok.Load() == 0 {
		t.Fatal("no request succeeded")
	}
	if len(versions) != 2 {
		t.Errorf("answers came from %d model versions; the swaps should give 2: %v", len(versions), versions)
	}
	// Regression guard: with the defect (the body read inside an
	// in-flight place) the three slow clients held all three places for
	// seconds at a time and 1572 of 1585 steady requests got 503; with the
	// fix a place is held only while a request is classified, 503 needs
	// four steady requests at once, and 0 or 1 in some 3000-4600 got it.
	if overloaded.Load()*10 > done {
		t.Errorf("%d of %d requests refused with 503; slow clients are starving the others", overloaded.Load(), done)
	}
}

// writeBroken puts a file that is no model at path, by rename.
func writeBroken(path string) error {
	tmp := path + ".broken"
	if err := os.WriteFile(tmp, []byte("no model here"), 0o644); err != nil {
		return err
	}
	return os.Rename(tmp, path)
}

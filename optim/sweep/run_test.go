package sweep

import (
	"context"
	"errors"
	"math"
	"runtime"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// fake is a deterministic stand-in for training (invented numbers: the
// tests check properties that hold whatever a trainer returns): the
// measures are functions of the point index chosen so that accuracies tie
// often and margins sometimes, exercising every ranking key. Points whose
// index is 5 mod 11 fail.
func fake(_ context.Context, p Point) (Result, error) {
	k := p.Index
	if k%11 == 5 {
		return NaNResult(p), errors.New("diverged (fake)")
	}
	r := NaNResult(p)
	r.ValAccuracy = float64((k*7)%4) / 4
	r.ValScore = r.ValAccuracy          // four values: many ties
	r.MarginMin = float64((k*5)%3) / 10 // ties within ties
	r.Bound = float64((k*3)%5) + 0.5    // and ties within those
	r.MarginMean, r.TrainAccuracy, r.Rho = 2*r.MarginMin, 1, float64(k)
	r.Status = "finished"
	return r, nil
}

// equalResults compares everything but the measured seconds.
func equalResults(t *testing.T, what string, got, want []Result) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d results, want %d", what, len(got), len(want))
	}
	same := func(a, b float64) bool { return a == b || math.IsNaN(a) && math.IsNaN(b) }
	for i := range got {
		a, b := got[i], want[i]
		a.Seconds, b.Seconds = 0, 0
		if a.Point != b.Point || a.Err != b.Err || a.Status != b.Status || a.Epochs != b.Epochs ||
			!same(a.ValAccuracy, b.ValAccuracy) || !same(a.TrainAccuracy, b.TrainAccuracy) ||
			!same(a.MarginMin, b.MarginMin) || !same(a.MarginMean, b.MarginMean) ||
			!same(a.Bound, b.Bound) || !same(a.Rho, b.Rho) || !same(a.Loss, b.Loss) {
			t.Fatalf("%s: result %d differs:\n got %+v\nwant %+v", what, i, a, b)
		}
	}
}

func TestRunOrderAndErrors(t *testing.T) {
	pts := testGrid().Points()
	one, err := Run(context.Background(), pts, fake, 1)
	if err != nil {
		t.Fatal(err)
	}
	for k, r := range one {
		if r.Index != k {
			t.Fatalf("result %d is for point %d", k, r.Index)
		}
		if (k%11 == 5) != r.Failed() {
			t.Errorf("point %d: Err %q", k, r.Err)
		}
	}
	many, err := Run(context.Background(), pts, fake, 5)
	if err != nil {
		t.Fatal(err)
	}
	equalResults(t, "5 workers against 1", many, one)
}

// TestRunBoundsConcurrency counts calls in flight. The first calls wait
// until `workers` of them are in flight at once, so the test also fails
// if Run runs fewer at a time than it may (it would then time out).
func TestRunBoundsConcurrency(t *testing.T) {
	for _, workers := range []int{0, 1, 3} {
		limit := workers
		if workers == 0 {
			limit = runtime.GOMAXPROCS(0) // the documented default
		}
		var inFlight, peak atomic.Int64
		reached := make(chan struct{})
		var once sync.Once
		train := func(ctx context.Context, p Point) (Result, error) {
			n := inFlight.Add(1)
			defer inFlight.Add(-1)
			for {
				old := peak.Load()
				if n <= old || peak.CompareAndSwap(old, n) {
					break
				}
			}
			if n >= int64(limit) {
				once.Do(func() { close(reached) })
			}
			select {
			case <-reached:
			case <-time.After(10 * time.Second):
				return Result{}, errors.New("the limit was never reached")
			}
			return fake(ctx, p)
		}
		rs, err := Run(context.Background(), testGrid().Points(), train, workers)
		if err != nil {
			t.Fatal(err)
		}
		if got := peak.Load(); got != int64(limit) {
			t.Errorf("workers=%d: at most %d calls in flight, want exactly %d", workers, got, limit)
		}
		for _, r := range rs {
			if r.Err == "the limit was never reached" {
				t.Fatalf("workers=%d: Run never had %d calls in flight", workers, limit)
			}
		}
	}
}

// TestRunCancel cancels the context from inside the third call. The
// running calls see it; after the cancel, only a point another worker had
// already taken may start (at most workers−1 of them); Run returns the
// results finished before it, in point order, with context.Canceled.
func TestRunCancel(t *testing.T) {
	const workers = 2
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var calls, late atomic.Int64
	var canceled atomic.Bool
	train := func(ctx context.Context, p Point) (Result, error) {
		if canceled.Load() {
			late.Add(1)
		}
		if calls.Add(1) == 3 {
			cancel()
			canceled.Store(true)
		}
		if ctx.Err() != nil {
			return Result{}, ctx.Err()
		}
		return fake(ctx, p)
	}
	pts := testGrid().Points()
	rs, err := Run(ctx, pts, train, workers)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error %v, want context.Canceled", err)
	}
	if n := late.Load(); n > workers-1 {
		t.Errorf("%d calls started after the cancel, want at most %d", n, workers-1)
	}
	if n := calls.Load(); n >= int64(len(pts)) {
		t.Errorf("all %d points were started despite the cancel", n)
	}
	if len(rs) >= int(calls.Load()) {
		t.Errorf("%d finished results of %d calls; the canceling call is unfinished", len(rs), calls.Load())
	}
	for i := 1; i < len(rs); i++ {
		if rs[i].Index <= rs[i-1].Index {
			t.Errorf("finished results out of order: %d after %d", rs[i].Index, rs[i-1].Index)
		}
	}
}

func TestRunEmpty(t *testing.T) {
	rs, err := Run(context.Background(), nil, fake, 0)
	if err != nil || len(rs) != 0 {
		t.Errorf("Run of no points: %v, %v", rs, err)
	}
}

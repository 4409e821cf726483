package sweep

import (
	"context"
	"math"
	"runtime"
	"sync"
	"time"
)

// Result is what one point's run gave. The training function fills in the
// measures; Run fills in Point and Seconds, and Err when the function
// fails. A measure that was not taken or does not apply is NaN.
type Result struct {
	Point
	// ValAccuracy is the fraction of validation rows classified right;
	// the first ranking key.
	ValAccuracy float64
	// ValScore is the validation rows' value by the sweep's ranking
	// metric (Metric): accuracy, balanced accuracy, macro-F1 or AUC; the
	// first ranking key. Measure sets it to ValAccuracy; a caller
	// ranking by another metric overwrites both.
	ValScore float64
	Metric   string
	// TrainAccuracy is the same on the training rows.
	TrainAccuracy float64
	// MarginMin and MarginMean summarize the normalized margins
	// f_y(x; V) − max_{j≠y} f_j(x; V) (y·f(x; V) for one output) of the
	// TRAINING rows, the margins the theory and the bound speak of. A
	// larger minimum margin is the second ranking key.
	MarginMin, MarginMean float64
	// Bound is the margin bound on the test error (gauge.BoundOf, on the
	// training rows); a smaller bound is the third ranking key. It is
	// loose — usually above 1 — and only comparative: see package gauge.
	Bound float64
	// Rho is the network's scale ρ = ∏‖W_k‖_F at the end of the run.
	Rho float64
	// Loss is the last epoch's mean data loss; Epochs the epochs run;
	// Status the trainer's optim.Status, as text.
	Loss   float64
	Epochs int
	Status string
	// Seconds is the wall-clock time of the run (not part of any
	// comparison: it depends on the machine and its load).
	Seconds float64
	// Err is the error the training function returned, as text; empty
	// for a run that succeeded. Failed runs rank after all others.
	Err string
}

// Failed reports whether the run returned an error.
func (r *Result) Failed() bool { return r.Err != "" }

// NaNResult returns a Result for p with every measure NaN, for a training
// function to fill in the ones it takes.
func NaNResult(p Point) Result {
	nan := math.NaN()
	return Result{Point: p, ValAccuracy: nan, ValScore: nan, TrainAccuracy: nan, MarginMin: nan, MarginMean: nan, Bound: nan, Rho: nan, Loss: nan}
}

// TrainFunc trains one point and measures it. It is called from several
// goroutines at once, each with its own point: everything it shares with
// other calls (the data, say) it may only read. It should return soon
// after ctx is canceled (optim.Trainer.Run does, at the next step), with
// ctx's error or any other.
type TrainFunc func(ctx context.Context, p Point) (Result, error)

// Run trains every point with train, at most workers at a time (zero or
// negative: runtime.GOMAXPROCS(0)), each call on a goroutine of its own,
// taking points in the order given. It returns one Result per point in the
// order of points, whatever order they finished in.
//
// A call that returns an error other than the context's gives a Result
// with Err set (a diverging learning rate is a finding of the sweep, not a
// reason to stop it), ranked after the successful ones. When ctx is
// canceled, Run starts no new point, waits for the running calls to
// return, and returns the results finished before the cancel (in point
// order, without the unfinished points) with ctx.Err().
//
// The results do not depend on workers or on timing as long as train
// gives the same result for the same point, as rhomb's trainer does for
// the same seed whatever GOMAXPROCS is.
func Run(ctx context.Context, points []Point, train TrainFunc, workers int) ([]Result, error) {
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = min(workers, len(points))
	results := make([]Result, len(points))
	done := make([]bool, len(points))
	var (
		mu   sync.Mutex
		next int
		wg   sync.WaitGroup
	)
	// take hands out the next point's position, or −1 when there is none
	// or the context is canceled.
	take := func() int {
		mu.Lock()
		defer mu.Unlock()
		if next >= len(points) || ctx.Err() != nil {
			return -1
		}
		next++
		return next - 1
	}
	for range workers {
		wg.Go(func() {
			for k := take(); k >= 0; k = take() {
				p := points[k]
				start := time.Now()
				r, err := train(ctx, p)
				if err != nil && ctx.Err() != nil {
					return // canceled: the point is unfinished
				}
				r.Point, r.Seconds = p, time.Since(start).Seconds()
				if err != nil {
					r.Err = err.Error()
				}
				results[k], done[k] = r, true
			}
		})
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		var finished []Result
		for k, r := range results {
			if done[k] {
				finished = append(finished, r)
			}
		}
		return finished, err
	}
	return results, nil
}

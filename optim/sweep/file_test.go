package sweep

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// runShards runs the grid as n shards, each in its own Run (as separate
// processes would), writes each shard's results to a file in dir, and
// returns the paths.
func runShards(t *testing.T, gr *Grid, n int, train TrainFunc, dir string) []string {
	t.Helper()
	var paths []string
	for i := range n {
		rs, err := Run(context.Background(), gr.Shard(i, n), train, 1)
		if err != nil {
			t.Fatal(err)
		}
		res, err := NewResults(gr, ShardID{i, n}, rs)
		if err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, fmt.Sprintf("shard-%d-of-%d.jsonl", i, n))
		if err := res.Save(path); err != nil {
			t.Fatal(err)
		}
		paths = append(paths, path)
	}
	return paths
}

// TestMergeEqualsOneProcess: for n = 1 … 7 shards (more than some grids'
// points), merging the shard files gives exactly the results and ranking
// of one process running the whole grid with several workers.
func TestMergeEqualsOneProcess(t *testing.T) {
	gr := testGrid()
	one, err := Run(context.Background(), gr.Points(), fake, 4)
	if err != nil {
		t.Fatal(err)
	}
	ranked := Rank(one)
	for n := 1; n <= 7; n++ {
		paths := runShards(t, gr, n, fake, t.TempDir())
		m, err := Merge(paths...)
		if err != nil {
			t.Fatalf("n=%d: %v", n, err)
		}
		equalResults(t, "merged results", m.Results, one)
		equalResults(t, "merged ranking", m.Ranked, ranked)
		// The merge written as one file reads back to the same ranking.
		var b bytes.Buffer
		if _, err := m.All().WriteTo(&b); err != nil {
			t.Fatal(err)
		}
		back, err := ReadResults(&b, "merged")
		if err != nil {
			t.Fatal(err)
		}
		again, err := combine([]*Results{back}, make([]string, 1))
		if err != nil {
			t.Fatal(err)
		}
		equalResults(t, "re-read merge", again.Ranked, ranked)
	}
}

// TestRoundTripNonFinite: NaN and ±Inf survive a file (JSON has neither).
func TestRoundTripNonFinite(t *testing.T) {
	gr := &Grid{Rho0: []float64{0.5}}
	r := NaNResult(gr.Points()[0])
	r.Bound, r.MarginMin, r.ValAccuracy = math.Inf(1), math.Inf(-1), 0.1+0.2 // 0.30000000000000004: shortest form must keep every bit
	res, err := NewResults(gr, All, []Result{r})
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if _, err := res.WriteTo(&b); err != nil {
		t.Fatal(err)
	}
	back, err := ReadResults(&b, "x")
	if err != nil {
		t.Fatal(err)
	}
	equalResults(t, "round trip", back.Results, []Result{r})
}

func TestMergeErrors(t *testing.T) {
	gr := testGrid()
	dir := t.TempDir()
	three := runShards(t, gr, 3, fake, dir)
	// The same grid as two shards, for overlaps.
	twoDir := t.TempDir()
	two := runShards(t, gr, 2, fake, twoDir)
	other := testGrid()
	other.Base.Epochs = 6
	otherPaths := runShards(t, other, 3, fake, t.TempDir())

	for _, c := range []struct {
		name  string
		paths []string
		want  error
		piece string
	}{
		{"missing shard", three[:2], ErrMissing, "shard 2/3"},
		{"shard twice", []string{three[0], three[1], three[1], three[2]}, ErrDuplicate, "given twice"},
		{"overlapping shards", []string{three[0], three[1], three[2], two[0]}, ErrDuplicate, "has a result in"},
		{"different grid", []string{three[0], three[1], otherPaths[2]}, ErrMismatch, "fingerprint"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Merge(c.paths...)
			if !errors.Is(err, c.want) || !strings.Contains(err.Error(), c.piece) {
				t.Fatalf("error %v, want %v mentioning %q", err, c.want, c.piece)
			}
		})
	}

	// A file whose results were cut short (a shard killed while a copy was
	// made, say) is refused for the missing points.
	text, err := os.ReadFile(three[0])
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(string(text), "\n")
	cut := filepath.Join(dir, "cut.jsonl")
	if err := os.WriteFile(cut, []byte(strings.Join(lines[:len(lines)-2], "")), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Merge(cut, three[1], three[2]); !errors.Is(err, ErrMissing) {
		t.Errorf("truncated shard: error %v, want ErrMissing", err)
	}
	// A hand-edited grid no longer matches its fingerprint.
	edited := filepath.Join(dir, "edited.jsonl")
	if err := os.WriteFile(edited, []byte(strings.Replace(string(text), `"rho0":[0.01,`, `"rho0":[0.02,`, 1)), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Merge(edited, three[1], three[2]); !errors.Is(err, ErrMismatch) {
		t.Errorf("edited grid: error %v, want ErrMismatch", err)
	}
	// A result moved into another shard's file is not in that shard.
	moved := filepath.Join(dir, "moved.jsonl")
	t1, _ := os.ReadFile(three[1])
	l1 := strings.SplitAfter(string(t1), "\n")
	if err := os.WriteFile(moved, []byte(string(text)+l1[1]), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Merge(moved); !errors.Is(err, ErrMismatch) || !strings.Contains(err.Error(), "moved.jsonl:") {
		t.Errorf("moved result: error %v, want ErrMismatch naming the file and line", err)
	}
	// Not a results file at all.
	junk := filepath.Join(dir, "junk.jsonl")
	if err := os.WriteFile(junk, []byte("{\"format\":\"something else\"}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Merge(junk); !errors.Is(err, ErrFormat) {
		t.Errorf("junk: error %v, want ErrFormat", err)
	}
	// NewResults refuses an unfinished shard.
	rs, _ := Run(context.Background(), gr.Shard(0, 3), fake, 1)
	if _, err := NewResults(gr, ShardID{0, 3}, rs[1:]); !errors.Is(err, ErrMissing) {
		t.Errorf("unfinished shard: error %v, want ErrMissing", err)
	}
}

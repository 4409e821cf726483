package sweep

import (
	"encoding/json"
	"os"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/optim"
)

// testGrid has 3·2·2·1·2 = 24 points.
func testGrid() *Grid {
	return &Grid{
		Rho0:         []float64{0.01, 0.1, 1},
		WeightDecay:  []float64{0, 1e-3},
		LearningRate: []float64{0.05, 0.1},
		Temperature:  []float64{0},
		Seeds:        []uint64{1, 2},
		Base:         optim.Settings{BatchSize: 16, Epochs: 5},
		Context:      json.RawMessage(`{"data":"test"}`),
	}
}

// TestPointsOrder checks the documented order against the index formula
// k = (((i_ρ0·n_λ + i_λ)·n_η + i_η)·n_T + i_T)·n_seed + i_seed, worked by
// hand for a few points (the formula is the package's own definition).
func TestPointsOrder(t *testing.T) {
	gr := testGrid()
	pts := gr.Points()
	if len(pts) != 24 {
		t.Fatalf("%d points, want 3·2·2·1·2 = 24", len(pts))
	}
	for k, p := range pts {
		if p.Index != k {
			t.Fatalf("point %d has Index %d", k, p.Index)
		}
	}
	// k = 0: every axis at its first value.
	// k = 1: the seed moves first: seed 2.
	// k = 2: ((0·2+0)·2+1)·1·2 + 0 → η = 0.1, seed 1.
	// k = 4: ((0·2+1)·2+0)·2 = 4 → λ = 1e-3.
	// k = 8: ((1·2+0)·2+0)·2 = 8 → ρ0 = 0.1.
	// k = 23: the last value of every axis.
	for _, c := range []struct {
		k    int
		want Point
	}{
		{0, Point{0, 0.01, 0, 0.05, 0, 1}},
		{1, Point{1, 0.01, 0, 0.05, 0, 2}},
		{2, Point{2, 0.01, 0, 0.1, 0, 1}},
		{4, Point{4, 0.01, 1e-3, 0.05, 0, 1}},
		{8, Point{8, 0.1, 0, 0.05, 0, 1}},
		{23, Point{23, 1, 1e-3, 0.1, 0, 2}},
	} {
		if pts[c.k] != c.want {
			t.Errorf("point %d = %+v, want %+v", c.k, pts[c.k], c.want)
		}
	}
}

// TestEmptyAxesTakeBase checks the documented zero value: empty axes are
// the base settings' single values (ρ0: 0), so the zero Grid is one point.
func TestEmptyAxesTakeBase(t *testing.T) {
	var zero Grid
	if pts := zero.Points(); len(pts) != 1 || pts[0] != (Point{}) {
		t.Errorf("zero grid: %+v, want one zero point", pts)
	}
	gr := Grid{Base: optim.Settings{LearningRate: 0.2, WeightDecay: 1e-4, Temperature: 1e-6, Seed: 9}}
	want := Point{0, 0, 1e-4, 0.2, 1e-6, 9}
	if pts := gr.Points(); len(pts) != 1 || pts[0] != want {
		t.Errorf("points %+v, want [%+v]", pts, want)
	}
	s := testGrid().Settings(Point{LearningRate: 0.3, WeightDecay: 0.01, Temperature: 2, Seed: 5})
	if s.LearningRate != 0.3 || s.WeightDecay != 0.01 || s.Temperature != 2 || s.Seed != 5 || s.BatchSize != 16 || s.Epochs != 5 {
		t.Errorf("Settings = %+v", s)
	}
}

// TestShardsPartition checks that for n = 1 … 7 every point is in exactly
// one of the n shards, on a grid of 24 points and on one of 5 (where
// n = 6, 7 leave shards empty), and that each shard is in point order.
func TestShardsPartition(t *testing.T) {
	five := &Grid{Rho0: []float64{1, 2, 3, 4, 5}}
	for _, gr := range []*Grid{testGrid(), five} {
		all := gr.Points()
		for n := 1; n <= 7; n++ {
			count := make([]int, len(all))
			for i := range n {
				prev := -1
				for _, p := range gr.Shard(i, n) {
					if p != all[p.Index] {
						t.Errorf("n=%d shard %d: %+v is not the grid's point %d", n, i, p, p.Index)
					}
					if p.Index%n != i {
						t.Errorf("n=%d shard %d holds point %d (round-robin puts it in %d)", n, i, p.Index, p.Index%n)
					}
					if p.Index <= prev {
						t.Errorf("n=%d shard %d out of order", n, i)
					}
					prev = p.Index
					count[p.Index]++
				}
			}
			for k, c := range count {
				if c != 1 {
					t.Errorf("%d points, n=%d: point %d is in %d shards, want 1", len(all), n, k, c)
				}
			}
		}
	}
	defer func() {
		if recover() == nil {
			t.Error("Shard(3, 3) did not panic")
		}
	}()
	testGrid().Shard(3, 3)
}

func TestValidate(t *testing.T) {
	if err := testGrid().Validate(); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		edit func(*Grid)
		want string
	}{
		{"negative ρ0", func(g *Grid) { g.Rho0 = []float64{-1} }, "Rho0[0]"},
		{"zero rate", func(g *Grid) { g.LearningRate = []float64{0.1, 0} }, "LearningRate[1]"},
		{"repeat", func(g *Grid) { g.WeightDecay = []float64{1e-3, 1e-3} }, "repeats"},
		{"repeat seed", func(g *Grid) { g.Seeds = []uint64{3, 3} }, "Seeds[1]"},
		{"bad context", func(g *Grid) { g.Context = json.RawMessage("{") }, "Context"},
	} {
		gr := testGrid()
		c.edit(gr)
		if err := gr.Validate(); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one naming %s", c.name, err, c.want)
		}
	}
}

// TestFingerprint checks that the fingerprint is the same for equal
// grids, ignores hooks and the base values that the axes replace, and
// changes with each thing that changes the points or their training.
func TestFingerprint(t *testing.T) {
	fp := func(g *Grid) string {
		s, err := g.Fingerprint()
		if err != nil {
			t.Fatal(err)
		}
		return s
	}
	base := fp(testGrid())
	same := testGrid()
	same.Base.Hooks = &optim.Hooks{}
	same.Base.LearningRate = 7 // replaced by the learning-rate axis
	if fp(same) != base {
		t.Error("hooks or a replaced base value changed the fingerprint")
	}
	for name, edit := range map[string]func(*Grid){
		"ρ0 value":   func(g *Grid) { g.Rho0[2] = 2 },
		"axis order": func(g *Grid) { g.Seeds = []uint64{2, 1} },
		"seed added": func(g *Grid) { g.Seeds = append(g.Seeds, 3) },
		"batch":      func(g *Grid) { g.Base.BatchSize = 8 },
		"epochs":     func(g *Grid) { g.Base.Epochs = 6 },
		"schedule":   func(g *Grid) { g.Base.Schedule = optim.Cosine{Floor: 0.1} },
		"context":    func(g *Grid) { g.Context = json.RawMessage(`{"data":"other"}`) },
	} {
		g := testGrid()
		edit(g)
		if fp(g) == base {
			t.Errorf("%s: fingerprint unchanged", name)
		}
	}
	a, b := testGrid(), testGrid()
	a.Base.Schedule, b.Base.Schedule = optim.Cosine{Floor: 0.1}, optim.Cosine{Floor: 0.2}
	if fp(a) == fp(b) {
		t.Error("schedule parameters do not enter the fingerprint")
	}
}

// TestParseShard checks the rules ParseShard documents, with the
// environment variable set through t.Setenv.
func TestParseShard(t *testing.T) {
	unset := func(t *testing.T) {
		t.Setenv(IndexEnv, "") // restores the variable after the test
		os.Unsetenv(IndexEnv)
	}
	type want struct {
		id  ShardID
		err string // a piece of the error; empty for none
	}
	for _, c := range []struct {
		name, spec string
		env        *string // nil: unset
		want       want
	}{
		{"nothing", "", nil, want{All, ""}},
		{"explicit", "2/5", nil, want{ShardID{2, 5}, ""}},
		{"explicit agrees", "2/5", ptr("2"), want{ShardID{2, 5}, ""}},
		{"explicit agrees, leading zero", "2/5", ptr("02"), want{ShardID{2, 5}, ""}},
		{"explicit disagrees", "2/5", ptr("3"), want{ShardID{}, "disagrees"}},
		{"from env", "/4", ptr("3"), want{ShardID{3, 4}, ""}},
		{"from env, empty", "/4", ptr(""), want{ShardID{}, "not set"}},
		{"from env, unset", "/4", nil, want{ShardID{}, "not set"}},
		{"env out of range", "/4", ptr("4"), want{ShardID{}, "0 to 3"}},
		{"env not a number", "/4", ptr("x"), want{ShardID{}, `"x"`}},
		{"env without count", "", ptr("1"), want{ShardID{}, "/n"}},
		{"empty env, no shard", "", ptr(""), want{All, ""}},
		{"index out of range", "5/5", nil, want{ShardID{}, "0 to 4"}},
		{"zero count", "0/0", nil, want{ShardID{}, "count"}},
		{"no slash", "3", nil, want{ShardID{}, "i/n"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			if c.env == nil {
				unset(t)
			} else {
				t.Setenv(IndexEnv, *c.env)
			}
			id, err := ParseShard(c.spec)
			switch {
			case c.want.err == "" && err != nil:
				t.Fatalf("error %v", err)
			case c.want.err != "" && (err == nil || !strings.Contains(err.Error(), c.want.err)):
				t.Fatalf("error %v, want one containing %q", err, c.want.err)
			case err == nil && id != c.want.id:
				t.Fatalf("shard %v, want %v", id, c.want.id)
			}
		})
	}
}

func ptr(s string) *string { return &s }

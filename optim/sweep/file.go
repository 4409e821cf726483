package sweep

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"github.com/rhomb/rhomb/internal/atomicfile"
)

// Results is one shard's results together with the description of the
// grid they belong to: what a results file holds, and what Merge combines.
type Results struct {
	// Fingerprint is the grid's (Grid.Fingerprint).
	Fingerprint string
	// Shard is the shard the results are of; All for a whole sweep or a
	// merge.
	Shard ShardID
	// Axes and Context describe the grid (Grid.Axes, Grid.Context).
	Axes    Axes
	Context json.RawMessage
	// Model, when not empty, names a file holding the model of the best
	// result in this file, point ModelIndex; a relative name is relative to
	// the directory of the results file. Merge uses it to find the
	// winner's model without retraining.
	Model      string
	ModelIndex int
	// Results are one per point of the shard, in point order.
	Results []Result

	desc description
}

// NewResults checks that results are exactly the points of shard id of gr
// (one each, with the grid's values; any order) and returns them, sorted
// into point order, ready to write. An unfinished shard — after a cancel,
// say — is refused: a results file is always complete.
func NewResults(gr *Grid, id ShardID, results []Result) (*Results, error) {
	if err := gr.Validate(); err != nil {
		return nil, err
	}
	d, err := gr.describe()
	if err != nil {
		return nil, err
	}
	fp, err := fingerprintOf(d)
	if err != nil {
		return nil, err
	}
	if id.Count < 1 || id.Index < 0 || id.Index >= id.Count {
		return nil, fmt.Errorf("sweep: shard %s; want 0 ≤ i < n", id)
	}
	r := &Results{Fingerprint: fp, Shard: id, Axes: d.Axes, Context: d.Context, desc: d, ModelIndex: -1,
		Results: slices.Clone(results)}
	slices.SortFunc(r.Results, func(a, b Result) int { return a.Index - b.Index })
	if err := r.check("", nil); err != nil {
		return nil, err
	}
	want := d.Axes.Shard(id.Index, id.Count)
	if len(r.Results) != len(want) {
		got := map[int]bool{}
		for _, x := range r.Results {
			got[x.Index] = true
		}
		for _, p := range want {
			if !got[p.Index] {
				return nil, fmt.Errorf("%w: point %s of shard %s (%d of %d results present)", ErrMissing, p, id, len(r.Results), len(want))
			}
		}
	}
	return r, nil
}

// Sentinel errors of Merge and ReadResults, wrapped with the file and
// point they concern.
var (
	// ErrMissing: a point of the grid has no result.
	ErrMissing = errors.New("sweep: missing result")
	// ErrDuplicate: a point has more than one result, or a shard was given
	// twice.
	ErrDuplicate = errors.New("sweep: duplicate result")
	// ErrMismatch: files describe different grids, or a result does not
	// belong to its file's grid or shard.
	ErrMismatch = errors.New("sweep: results of different grids")
	// ErrFormat: a file is not a results file, or is damaged.
	ErrFormat = errors.New("sweep: not a results file")
)

// check verifies the results against the description: indices in range,
// each the grid's point, in the file's shard, and none repeated. name and
// lines, when given, say where a bad result is.
func (r *Results) check(name string, lines []int) error {
	pts := r.Axes.Points()
	where := func(k int) string {
		switch {
		case name != "" && lines != nil:
			return fmt.Sprintf("%s:%d: ", name, lines[k])
		case name != "":
			return name + ": "
		}
		return ""
	}
	seen := map[int]bool{}
	for k, x := range r.Results {
		i := x.Index
		switch {
		case i < 0 || i >= len(pts):
			return fmt.Errorf("%w: %sresult for point %d, but the grid has points 0 to %d", ErrMismatch, where(k), i, len(pts)-1)
		case x.Point != pts[i]:
			return fmt.Errorf("%w: %sresult for point %s, but the grid's point %d is %s", ErrMismatch, where(k), x.Point, i, pts[i])
		case i%r.Shard.Count != r.Shard.Index:
			return fmt.Errorf("%w: %sresult for point %d, which is not in shard %s (it is in shard %d/%d)", ErrMismatch, where(k), i, r.Shard, i%r.Shard.Count, r.Shard.Count)
		case seen[i]:
			return fmt.Errorf("%w: %spoint %s has two results", ErrDuplicate, where(k), x.Point)
		}
		seen[i] = true
	}
	return nil
}

// header is the first line of a results file.
type header struct {
	Format      string      `json:"format"`
	Version     int         `json:"version"`
	Fingerprint string      `json:"fingerprint"`
	Shard       int         `json:"shard"`
	Shards      int         `json:"shards"`
	Points      int         `json:"points"`
	Grid        description `json:"grid"`
	Model       string      `json:"model,omitempty"`
	ModelIndex  *int        `json:"model_index,omitempty"`
}

const (
	formatName    = "rhomb sweep results"
	formatVersion = 1
)

// line is one result as a results file stores it.
type line struct {
	Point
	ValAccuracy   num     `json:"validation_accuracy"`
	ValScore      *num    `json:"validation_score,omitempty"` // absent in files written before the metric could be chosen
	Metric        string  `json:"metric,omitempty"`
	TrainAccuracy num     `json:"train_accuracy"`
	MarginMin     num     `json:"margin_min"`
	MarginMean    num     `json:"margin_mean"`
	Bound         num     `json:"bound"`
	Rho           num     `json:"rho"`
	Loss          num     `json:"loss"`
	Epochs        int     `json:"epochs"`
	Status        string  `json:"status,omitempty"`
	Seconds       float64 `json:"seconds"`
	Err           string  `json:"error,omitempty"`
}

// num is a float64 that JSON holds as a number when finite and as null
// (NaN) or the strings "+Inf" and "-Inf" otherwise, which JSON numbers
// cannot express.
type num float64

func (f num) MarshalJSON() ([]byte, error) {
	v := float64(f)
	switch {
	case math.IsNaN(v):
		return []byte("null"), nil
	case math.IsInf(v, 1):
		return []byte(`"+Inf"`), nil
	case math.IsInf(v, -1):
		return []byte(`"-Inf"`), nil
	}
	return json.Marshal(v)
}

func (f *num) UnmarshalJSON(b []byte) error {
	switch string(b) {
	case "null":
		*f = num(math.NaN())
		return nil
	case `"+Inf"`:
		*f = num(math.Inf(1))
		return nil
	case `"-Inf"`:
		*f = num(math.Inf(-1))
		return nil
	}
	var v float64
	if err := json.Unmarshal(b, &v); err != nil {
		return err
	}
	*f = num(v)
	return nil
}

// WriteTo writes the results as JSON Lines: a header object (format,
// version, fingerprint, shard, grid description, model) on the first line,
// then one object per result in point order. Floats are written in the
// shortest form that reads back to the same bits, so a file read back
// ranks exactly as the results it was written from.
func (r *Results) WriteTo(w io.Writer) (int64, error) {
	d := r.desc
	if d.Axes.Size() == 0 {
		return 0, errors.New("sweep: Results not made by NewResults, ReadResults or Merged.All: it has no grid description to write")
	}
	h := header{Format: formatName, Version: formatVersion, Fingerprint: r.Fingerprint, Shard: r.Shard.Index, Shards: r.Shard.Count,
		Points: d.Axes.Size(), Grid: d, Model: r.Model}
	if r.Model != "" {
		h.ModelIndex = &r.ModelIndex
	}
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(h); err != nil {
		return 0, err
	}
	for _, x := range r.Results {
		vs := num(x.ValScore)
		if err := enc.Encode(line{Point: x.Point, ValAccuracy: num(x.ValAccuracy), ValScore: &vs, Metric: x.Metric, TrainAccuracy: num(x.TrainAccuracy),
			MarginMin: num(x.MarginMin), MarginMean: num(x.MarginMean), Bound: num(x.Bound), Rho: num(x.Rho), Loss: num(x.Loss),
			Epochs: x.Epochs, Status: x.Status, Seconds: x.Seconds, Err: x.Err}); err != nil {
			return 0, err
		}
	}
	n, err := w.Write(b.Bytes())
	return int64(n), err
}

// Save writes the results to path atomically (a temporary file renamed
// over path), so that a reader — a merge job on a shared volume — never
// sees a part of a file.
func (r *Results) Save(path string) error {
	var b bytes.Buffer
	if _, err := r.WriteTo(&b); err != nil {
		return err
	}
	if err := atomicfile.WriteFile(path, b.Bytes()); err != nil {
		return fmt.Errorf("sweep: %w", err)
	}
	return nil
}

// ReadResults reads a results file written by WriteTo; name is used in
// errors. It checks the format, that the fingerprint is that of the grid
// the file describes (so a hand-edited grid is caught), and every result
// against the grid and the shard.
func ReadResults(rd io.Reader, name string) (*Results, error) {
	sc := bufio.NewScanner(rd)
	sc.Buffer(make([]byte, 0, 64*1024), 16<<20)
	bad := func(n int, format string, args ...any) error {
		return fmt.Errorf("%w: %s:%d: %s", ErrFormat, name, n, fmt.Sprintf(format, args...))
	}
	if !sc.Scan() {
		if err := sc.Err(); err != nil {
			return nil, fmt.Errorf("sweep: %s: %w", name, err)
		}
		return nil, bad(1, "empty file")
	}
	var h header
	dec := json.NewDecoder(bytes.NewReader(sc.Bytes()))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&h); err != nil {
		return nil, bad(1, "header: %v", err)
	}
	if h.Format != formatName || h.Version != formatVersion {
		return nil, bad(1, "header says format %q version %d; want %q version %d", h.Format, h.Version, formatName, formatVersion)
	}
	if h.Shards < 1 || h.Shard < 0 || h.Shard >= h.Shards {
		return nil, bad(1, "shard %d/%d; want 0 ≤ i < n", h.Shard, h.Shards)
	}
	if h.Grid.Axes.Size() == 0 {
		return nil, bad(1, "the grid has an empty axis")
	}
	if h.Points != h.Grid.Axes.Size() {
		return nil, bad(1, "header says %d points, its grid has %d", h.Points, h.Grid.Axes.Size())
	}
	fp, err := fingerprintOf(h.Grid)
	if err != nil {
		return nil, bad(1, "grid: %v", err)
	}
	if fp != h.Fingerprint {
		return nil, fmt.Errorf("%w: %s:1: the fingerprint %s is not that of the grid the file describes (%s): the file was edited or damaged", ErrMismatch, name, short(h.Fingerprint), short(fp))
	}
	r := &Results{Fingerprint: h.Fingerprint, Shard: ShardID{h.Shard, h.Shards}, Axes: h.Grid.Axes, Context: h.Grid.Context,
		Model: h.Model, ModelIndex: -1, desc: h.Grid}
	if h.ModelIndex != nil {
		r.ModelIndex = *h.ModelIndex
	}
	var lines []int
	for n := 2; sc.Scan(); n++ {
		if len(bytes.TrimSpace(sc.Bytes())) == 0 {
			continue
		}
		var l line
		dec := json.NewDecoder(bytes.NewReader(sc.Bytes()))
		dec.DisallowUnknownFields()
		if err := dec.Decode(&l); err != nil {
			return nil, bad(n, "result: %v", err)
		}
		res := Result{Point: l.Point, ValAccuracy: float64(l.ValAccuracy), ValScore: float64(l.ValAccuracy), Metric: l.Metric, TrainAccuracy: float64(l.TrainAccuracy),
			MarginMin: float64(l.MarginMin), MarginMean: float64(l.MarginMean), Bound: float64(l.Bound), Rho: float64(l.Rho),
			Loss: float64(l.Loss), Epochs: l.Epochs, Status: l.Status, Seconds: l.Seconds, Err: l.Err}
		if l.ValScore != nil {
			res.ValScore = float64(*l.ValScore)
		}
		if res.Metric == "" {
			res.Metric = "accuracy"
		}
		r.Results = append(r.Results, res)
		lines = append(lines, n)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("sweep: %s: %w", name, err)
	}
	if err := r.check(name, lines); err != nil {
		return nil, err
	}
	slices.SortFunc(r.Results, func(a, b Result) int { return a.Index - b.Index })
	return r, nil
}

// LoadResults reads the results file at path.
func LoadResults(path string) (*Results, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadResults(f, path)
}

func short(fp string) string {
	if len(fp) > 12 {
		return fp[:12]
	}
	return fp
}

// Merged is the combination of a sweep's shard results.
type Merged struct {
	Fingerprint string
	Axes        Axes
	Context     json.RawMessage
	// Results holds one result per point of the grid, in point order;
	// Ranked the same, best first (Rank).
	Results, Ranked []Result
	// Parts are the shard results as given, and Sources their file names
	// (empty for results merged in memory).
	Parts   []*Results
	Sources []string
}

// Best returns the best result and the shard results that hold it.
func (m *Merged) Best() (Result, *Results, string) {
	b := m.Ranked[0]
	for i, p := range m.Parts {
		if b.Index%p.Shard.Count == p.Shard.Index {
			for _, r := range p.Results {
				if r.Index == b.Index {
					return b, p, m.Sources[i]
				}
			}
		}
	}
	return b, nil, "" // unreachable after a successful merge
}

// All returns the merged results as the results of one shard, All, to
// write as one file (which can itself be merged again).
func (m *Merged) All() *Results {
	return &Results{Fingerprint: m.Fingerprint, Shard: All, Axes: m.Axes, Context: m.Context, ModelIndex: -1,
		Results: m.Results, desc: m.Parts[0].desc}
}

// Merge reads results files — typically one per shard of a sweep — and
// combines them into one ranking (see combine for the checks).
func Merge(paths ...string) (*Merged, error) {
	parts := make([]*Results, len(paths))
	for i, p := range paths {
		r, err := LoadResults(p)
		if err != nil {
			return nil, err
		}
		parts[i] = r
	}
	return combine(parts, paths)
}

// combine merges shard results already read. It checks that they share
// one fingerprint (ErrMismatch), that no shard is given twice and no
// point has two results (ErrDuplicate), and that every point of the grid
// has a result (ErrMissing). Shards of different counts may be mixed (a
// rerun of part of a sweep with another n): what must hold is that the
// results cover the grid exactly once.
func combine(parts []*Results, names []string) (*Merged, error) {
	if len(parts) == 0 {
		return nil, errors.New("sweep: nothing to merge")
	}
	label := func(i int) string {
		if names[i] != "" {
			return names[i]
		}
		return fmt.Sprintf("results %d (shard %s)", i+1, parts[i].Shard)
	}
	first := parts[0]
	m := &Merged{Fingerprint: first.Fingerprint, Axes: first.Axes, Context: first.Context, Parts: parts, Sources: names}
	pts := first.Axes.Points()
	byPoint := make([]int, len(pts)) // which part holds each point, +1
	shards := map[ShardID]int{}
	for i, p := range parts {
		if p.Fingerprint != first.Fingerprint {
			return nil, fmt.Errorf("%w: %s has fingerprint %s, %s has %s: they are not shards of one sweep (different axes, settings, data or network)",
				ErrMismatch, label(i), short(p.Fingerprint), label(0), short(first.Fingerprint))
		}
		if j, ok := shards[p.Shard]; ok {
			return nil, fmt.Errorf("%w: shard %s is given twice: %s and %s", ErrDuplicate, p.Shard, label(j), label(i))
		}
		shards[p.Shard] = i
		for _, r := range p.Results {
			if j := byPoint[r.Index]; j > 0 {
				return nil, fmt.Errorf("%w: point %s has a result in %s and in %s", ErrDuplicate, r.Point, label(j-1), label(i))
			}
			byPoint[r.Index] = i + 1
			m.Results = append(m.Results, r)
		}
	}
	var missing []int
	for k, j := range byPoint {
		if j == 0 {
			missing = append(missing, k)
		}
	}
	if len(missing) > 0 {
		n := first.Shard.Count
		k := pts[missing[0]]
		more := ""
		if len(missing) > 1 {
			more = fmt.Sprintf(" and %d more (points %s)", len(missing)-1, abbreviate(missing[1:], 10))
		}
		return nil, fmt.Errorf("%w: point %s%s; with %d shards it belongs to shard %d/%d: is that shard's file missing or unfinished?",
			ErrMissing, k, more, n, k.Index%n, n)
	}
	slices.SortFunc(m.Results, func(a, b Result) int { return a.Index - b.Index })
	m.Ranked = Rank(m.Results)
	return m, nil
}

// abbreviate lists at most n of the indices.
func abbreviate(idx []int, n int) string {
	s := make([]string, 0, n)
	for _, k := range idx[:min(n, len(idx))] {
		s = append(s, strconv.Itoa(k))
	}
	if len(idx) > n {
		s = append(s, "…")
	}
	return strings.Join(s, ", ")
}

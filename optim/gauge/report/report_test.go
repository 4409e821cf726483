package report_test

import (
	"bytes"
	"context"
	"encoding/base64"
	"encoding/csv"
	"encoding/xml"
	"errors"
	"github.com/rhomb/rhomb/internal/demorun"
	"image/png"
	"io"
	"io/fs"
	"math"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/gauge/plot"
	"github.com/rhomb/rhomb/optim/gauge/report"
)

var (
	demoOnce sync.Once
	demoRun  *report.Run
	demoHTML []byte
	demoErr  error
)

// demoReport is a short real training run on the demo data and its
// report, shared by the tests of this package (a few seconds in all).
func demoReport(t *testing.T) (*report.Run, []byte) {
	t.Helper()
	demoOnce.Do(func() {
		demoRun, demoErr = demorun.Run(context.Background(), demorun.Options{Epochs: 12})
		if demoErr != nil {
			return
		}
		var b bytes.Buffer
		demoErr = report.Write(&b, demoRun)
		demoHTML = b.Bytes()
	})
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return demoRun, demoHTML
}

// node is a parsed element: enough of a DOM to find cells by id.
type node struct {
	name     string
	attr     map[string]string
	children []*node
	text     strings.Builder // all character data inside, children's included
}

// parse reads the page with encoding/xml in strict mode: the report is
// written to be well-formed XML (XHTML syntax), so a parse error here is a
// malformed page. Entities other than XML's own would fail too.
func parse(t *testing.T, page []byte) *node {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(page))
	d.Strict = true
	root := &node{name: "#document"}
	stack := []*node{root}
	for {
		tok, err := d.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("the report is not well-formed: %v", err)
		}
		switch tk := tok.(type) {
		case xml.StartElement:
			n := &node{name: tk.Name.Local, attr: map[string]string{}}
			for _, a := range tk.Attr {
				n.attr[a.Name.Local] = a.Value
			}
			top := stack[len(stack)-1]
			top.children = append(top.children, n)
			stack = append(stack, n)
		case xml.EndElement:
			stack = stack[:len(stack)-1]
		case xml.CharData:
			for _, n := range stack {
				n.text.Write(tk)
			}
		}
	}
	if len(stack) != 1 {
		t.Fatalf("%d elements left open", len(stack)-1)
	}
	return root
}

func (n *node) walk(f func(*node)) {
	f(n)
	for _, c := range n.children {
		c.walk(f)
	}
}

func (n *node) byID(id string) *node {
	var found *node
	n.walk(func(m *node) {
		if m.attr["id"] == id && found == nil {
			found = m
		}
	})
	return found
}

func (n *node) all(name string) []*node {
	var out []*node
	n.walk(func(m *node) {
		if m.name == name {
			out = append(out, m)
		}
	})
	return out
}

func (n *node) cells() []string {
	var out []string
	for _, c := range n.children {
		if c.name == "td" || c.name == "th" {
			out = append(out, strings.TrimSpace(c.text.String()))
		}
	}
	return out
}

// The page is one self-contained, well-formed document: it parses as
// XML, names no http(s) address anywhere, every src and href is a data:
// URI or a fragment, there is no <link> or external script, and every
// figure plot.All makes for the run is there as a PNG that decodes to
// twice its layout size (plot.DPI = 2 × 96).
func TestSelfContained(t *testing.T) {
	r, page := demoReport(t)
	if bytes.Contains(page, []byte("http://")) || bytes.Contains(page, []byte("https://")) {
		t.Error("the report contains an http(s) address")
	}
	doc := parse(t, page)
	doc.walk(func(n *node) {
		for _, k := range []string{"src", "href"} {
			if v, ok := n.attr[k]; ok && !strings.HasPrefix(v, "data:") && !strings.HasPrefix(v, "#") {
				t.Errorf("<%s %s=%.40q>: refers outside the page", n.name, k, v)
			}
		}
		if n.name == "link" || (n.name == "script" && n.attr["src"] != "") {
			t.Errorf("<%s> refers to a resource", n.name)
		}
	})
	figs, err := plot.All(r.History, plot.Options{HeldoutLoss: r.HeldoutLoss, Start: r.Start})
	if err != nil {
		t.Fatal(err)
	}
	imgs := doc.all("img")
	if len(imgs) != len(figs) || len(figs) != 7 {
		t.Fatalf("%d images for %d figures; want 7", len(imgs), len(figs))
	}
	for i, f := range figs {
		fig := doc.byID("fig-" + f.Name)
		if fig == nil {
			t.Errorf("figure %s missing", f.Name)
			continue
		}
		img := imgs[i]
		const prefix = "data:image/png;base64,"
		src := img.attr["src"]
		if !strings.HasPrefix(src, prefix) {
			t.Errorf("%s: src does not start with %s", f.Name, prefix)
			continue
		}
		b, err := base64.StdEncoding.DecodeString(src[len(prefix):])
		if err != nil {
			t.Errorf("%s: base64: %v", f.Name, err)
			continue
		}
		p, err := png.DecodeConfig(bytes.NewReader(b))
		if err != nil {
			t.Errorf("%s: PNG: %v", f.Name, err)
			continue
		}
		w, _ := strconv.Atoi(img.attr["width"])
		h, _ := strconv.Atoi(img.attr["height"])
		// Both sizes are rounded from the same length: they may differ
		// from an exact factor 2 by the rounding of each, under 1 pixel.
		if math.Abs(float64(p.Width-2*w)) > 1 || math.Abs(float64(p.Height-2*h)) > 1 || w == 0 || h == 0 {
			t.Errorf("%s: PNG %d×%d shown at %d×%d; want twice the layout size", f.Name, p.Width, p.Height, w, h)
		}
		if img.attr["alt"] == "" {
			t.Errorf("%s: no alt text", f.Name)
		}
	}
	for _, id := range []string{"glance", "cautions", "bound", "figures", "confusion", "data", "settings", "epoch-table"} {
		if doc.byID(id) == nil {
			t.Errorf("section %s missing", id)
		}
	}
	caut := doc.byID("cautions").text.String()
	for _, c := range append(r.Notes, report.DefaultCautions...) {
		if !strings.Contains(caut, c) {
			t.Errorf("caution missing: %.50s…", c)
		}
	}
	if !strings.Contains(caut, "no safety guarantee") {
		t.Error("the cautions do not say that a classifier is no safety guarantee (DEVELOPERS.md)")
	}
}

// shown checks a number as the report prints it against the value it
// stands for. num prints four significant digits (strconv 'g', 4) and pct
// a percentage with two decimals, so the printed value may differ from
// the true one by half a unit in the last place: 0.5·10^(e−3) for a
// number with leading digit at 10^e, and 0.005 percentage points. A dash
// stands for NaN (not measured).
func shown(t *testing.T, what, text string, want float64) {
	t.Helper()
	text = strings.TrimSpace(text)
	if math.IsNaN(want) {
		if text != "–" {
			t.Errorf("%s: shows %q; want – for a value not measured", what, text)
		}
		return
	}
	percent := strings.HasSuffix(text, " %")
	v, err := strconv.ParseFloat(strings.TrimSuffix(text, " %"), 64)
	if err != nil {
		t.Errorf("%s: %q is not a number", what, text)
		return
	}
	var tol float64
	if percent {
		want, tol = 100*want, 0.005
	} else if v != 0 {
		tol = 0.5 * math.Pow(10, math.Floor(math.Log10(math.Abs(v)))-3)
	}
	if math.Abs(v-want) > tol*(1+1e-9) {
		t.Errorf("%s: shows %q; the run has %v (allowed ±%g)", what, text, want, tol)
	}
}

// Every number in the summary, the bound, the per-epoch table, the
// confusion matrices and the data section is the run's own, to the
// printed precision. The accuracies are recomputed here from the
// confusion counts, and the test error beside the bound (from gauge's
// margins) is checked against the test confusion matrix (from the
// decisions): two independent tallies of the same rows, which agree unless
// an output row has a tie, which no float run here produces.
func TestNumbersMatchTheRun(t *testing.T) {
	r, page := demoReport(t)
	doc := parse(t, page)
	h := r.History
	f := h.Last()
	cell := func(id string) string {
		n := doc.byID(id)
		if n == nil {
			t.Errorf("no element %s", id)
			return ""
		}
		return n.text.String()
	}
	acc := func(c report.Confusion) (float64, int, int) {
		right, total := 0, 0
		for i, row := range c.Count {
			for j, n := range row {
				total += n
				if i == j {
					right += n
				}
			}
		}
		return float64(right) / float64(total), right, total
	}
	for _, c := range r.Confusion {
		a, _, _ := acc(c)
		shown(t, "accuracy "+c.Name, cell("g-accuracy-"+c.Name), a)
		tab := doc.byID("confusion-" + c.Name)
		if tab == nil {
			t.Errorf("no confusion table for %s", c.Name)
			continue
		}
		rows := tab.all("tr")[1:]
		for i, row := range c.Count {
			got := rows[i].cells()
			if got[0] != c.Classes[i] {
				t.Errorf("%s row %d is %q; want %q", c.Name, i, got[0], c.Classes[i])
			}
			for j, n := range row {
				if got[1+j] != strconv.Itoa(n) {
					t.Errorf("%s[%d][%d] shows %q; want %d", c.Name, i, j, got[1+j], n)
				}
			}
		}
	}
	for id, v := range map[string]float64{
		"g-train-error": f.TrainError, "g-heldout-error": f.TestError, "g-rho": f.Rho,
		"g-rho-star": f.RhoStarMean, "g-gap": f.GapMean,
		"g-train-margin-min": f.Train.All.Min, "g-train-margin-mean": f.Train.All.Mean,
		"g-nc1": f.Collapse.NC1, "g-nc4": f.Collapse.NC4,
		"g-bound": r.Bound.Bound, "g-bound-test-error": r.Bound.TestError,
		"b-ramp": r.Bound.RampLoss, "b-complexity": r.Bound.Complexity, "b-confidence": r.Bound.Confidence,
		"b-bound": r.Bound.Bound, "b-test-error": r.Bound.TestError, "b-gamma": r.Bound.Gamma,
		"b-delta": r.Bound.Delta, "b-n": float64(r.Bound.N), "b-depth": float64(r.Bound.Depth),
		"b-input-norm": r.Bound.InputNorm,
	} {
		shown(t, id, cell(id), v)
	}
	if h.EquilibriumStep == 0 && strings.TrimSpace(cell("g-equilibrium-step")) != "not reached" {
		t.Errorf("equilibrium never reached, the report says %q", cell("g-equilibrium-step"))
	}
	var test report.Confusion
	for _, c := range r.Confusion {
		if c.Name == "test" {
			test = c
		}
	}
	_, right, total := acc(test)
	if wrong := int(math.Round(r.Bound.TestError * float64(total))); wrong != total-right {
		t.Errorf("bound's test error counts %d wrong rows, the confusion matrix %d", wrong, total-right)
	}

	rows := doc.byID("epoch-table").all("tr")[1:]
	if len(rows) != len(h.Epochs) {
		t.Fatalf("%d epoch rows; want %d", len(rows), len(h.Epochs))
	}
	for i, e := range h.Epochs {
		c := rows[i].cells()
		nc := func(g func(*gauge.CollapseReport) float64) float64 {
			if e.Collapse == nil {
				return math.NaN()
			}
			return g(e.Collapse)
		}
		want := []float64{float64(e.Epoch + 1), float64(e.Steps), e.Loss, r.HeldoutLoss[i], e.TrainError, e.TestError,
			e.Rho, e.RhoStarMean, e.GapMean, e.Train.All.Min, e.Train.All.Mean,
			nc(func(c *gauge.CollapseReport) float64 { return c.NC1 }), nc(func(c *gauge.CollapseReport) float64 { return c.NC2Norm }),
			nc(func(c *gauge.CollapseReport) float64 { return c.NC3 }), nc(func(c *gauge.CollapseReport) float64 { return c.NC4 })}
		if len(c) != len(want) {
			t.Fatalf("epoch row %d has %d cells; want %d", i, len(c), len(want))
		}
		for k, v := range want {
			shown(t, "epoch "+c[0]+" column "+strconv.Itoa(k), c[k], v)
		}
	}
}

// The data section agrees with the demo file as encoding/csv reads it:
// its row count, and its missing cells counted here from the raw text
// with the default markers (prep.DefaultMissing: empty, NA, NaN, null).
func TestDataSummary(t *testing.T) {
	_, page := demoReport(t)
	doc := parse(t, page)
	recs, err := csv.NewReader(bytes.NewReader(demo.CSV)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	header, body := recs[0], recs[1:]
	missing, missingRows := 0, 0
	for _, rec := range body {
		m := 0
		for j, v := range rec {
			if header[j] != demo.Label && prep.IsMissing(v, prep.DefaultMissing) {
				m++
			}
		}
		missing += m
		if m > 0 {
			missingRows++
		}
	}
	if missing == 0 {
		t.Fatal("the demo file has no missing cells; the check below would prove nothing")
	}
	if got := strings.TrimSpace(doc.byID("d-rows").text.String()); got != strconv.Itoa(len(body)) {
		t.Errorf("rows used %q; want %d", got, len(body))
	}
	want := strconv.Itoa(missing) + " (in " + strconv.Itoa(missingRows) + " rows)"
	if got := strings.TrimSpace(doc.byID("d-missing").text.String()); got != want {
		t.Errorf("missing cells %q; want %q", got, want)
	}
	if got := strings.TrimSpace(doc.byID("d-columns").text.String()); got != strconv.Itoa(len(header)-1) {
		t.Errorf("feature columns %q; want %d", got, len(header)-1)
	}

	// The split table's per-class counts, read under its own header, are
	// the row sums of the confusion matrix of the same set (both count
	// the true classes of its rows; the matrix is tallied by score, the
	// split by DescribeData).
	r, _ := demoReport(t)
	splits := doc.byID("d-splits").all("tr")
	head := splits[0].cells()[2:]
	for _, row := range splits[1:] {
		c := row.cells()
		for _, m := range r.Confusion {
			if m.Name != c[0] {
				continue
			}
			for i, name := range m.Classes {
				sum := 0
				for _, n := range m.Count[i] {
					sum += n
				}
				k := slices.Index(head, name)
				if k < 0 || c[2+k] != strconv.Itoa(sum) {
					t.Errorf("%s: class %s has %d rows in the confusion matrix; the split table shows %v under %v", m.Name, name, sum, c[2:], head)
				}
			}
		}
	}
}

// DescribeData on a hand-made table: three rows, two columns, with one
// missing cell in row 0, none in row 1 and two in row 2 — three missing
// cells in two rows, counted by hand.
func TestDescribeData(t *testing.T) {
	tab := &data.Table{Source: "hand.csv", Rows: 3, Dropped: 4, Labels: []string{"a", "b", "a"},
		Columns: []data.Column{
			{Name: "x", Kind: data.Numeric, Num: []float64{math.NaN(), 1, math.NaN()}, Missing: []bool{true, false, true}},
			{Name: "y", Kind: data.Numeric, Num: []float64{1, 2, math.NaN()}, Missing: []bool{false, false, true}},
		}}
	set := &data.Set[float64]{X: make([]float64, 6), Y: []float64{-1, 1, -1}, Rows: 3, Features: 2, Outputs: 1}
	d := report.DescribeData(tab, "dropped", report.Named[float64]{Name: "all", Set: set})
	if d.Missing != 3 || d.MissingRows != 2 || d.Rows != 3 || d.Dropped != 4 || d.Columns != 2 || d.Inputs != 2 {
		t.Errorf("got %+v; want 3 missing cells in 2 rows of 3, 4 dropped, 2 columns, 2 inputs", d)
	}
	// One ±1 column: −1 is class 0, +1 class 1 (data.Set's encoding).
	if len(d.Splits) != 1 || d.Splits[0].PerClass[0] != 2 || d.Splits[0].PerClass[1] != 1 {
		t.Errorf("splits %+v; want all: 2 of class 0, 1 of class 1", d.Splits)
	}
	if strings.Join(d.Classes, ",") != "a,b" {
		t.Errorf("classes %v; want a, b", d.Classes)
	}
}

func TestWriteRejects(t *testing.T) {
	if err := report.Write(io.Discard, &report.Run{}); err == nil {
		t.Error("Write accepted a Run without a History")
	}
	r, _ := demoReport(t)
	bad := *r
	bad.HeldoutLoss = bad.HeldoutLoss[:1]
	if err := report.Write(io.Discard, &bad); err == nil {
		t.Error("Write accepted one held-out loss for several epochs")
	}
	if err := report.WriteFile("/nonexistent-dir/r.html", r); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("WriteFile into a missing directory: %v; want fs.ErrNotExist", err)
	}
}

package main

// Round trips on the Palmer penguins data (CC0; fetched by .ci/fetch-data,
// see internal/opendata): what train saves, classify and check serve, and
// what the library computes from the same file must agree exactly.
//
// Facts of the file used below, from REFERENCES.md (the Palmer
// penguins row): 344 rows; columns species, island, bill_length_mm,
// bill_depth_mm, flipper_length_mm, body_mass_g, sex, year; 2 rows lack all
// four measurements, 11 lack sex; 342 rows have every measurement.

import (
	"encoding/csv"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim/modelfile"
)

const penguinRows = 344 // REFERENCES.md

// penguinArgs are the settings every penguin run shares: sex is left out
// (11 rows lack it) and year is not a property of the bird.
func penguinArgs(data string) []string {
	return []string{"train", "-data", data, "-label", "species", "-skip", "sex,year", "-quiet"}
}

// readCSV reads a whole CSV text: header and records.
func readCSV(t *testing.T, text string) (header []string, rows [][]string) {
	t.Helper()
	all, err := csv.NewReader(strings.NewReader(text)).ReadAll()
	if err != nil {
		t.Fatalf("reading CSV: %v", err)
	}
	if len(all) == 0 {
		t.Fatal("CSV has no header")
	}
	return all[0], all[1:]
}

func readFile(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func metric(t *testing.T, m map[string]any, name string) float64 {
	t.Helper()
	v, ok := m[name].(float64)
	if !ok {
		t.Fatalf("model metrics lack a number %q: %v", name, m)
	}
	return v
}

// sectionAfter returns the line following the line equal to title.
func sectionAfter(t *testing.T, text, title string) string {
	t.Helper()
	lines := strings.Split(text, "\n")
	i := slices.Index(lines, title)
	if i < 0 || i+1 >= len(lines) {
		t.Fatalf("output lacks a %q section:\n%s", title, text)
	}
	return lines[i+1]
}

// TestPenguinsRoundTrip trains on the penguins file, classifies the same
// file with the saved model, and recomputes every output row in memory
// through the library: the saved model loaded with modelfile.Load, each
// raw row's input fields through its Pipeline.ApplyStrings, then
// Network.Forward one row at a time. classify prints scores with
// strconv.FormatFloat(v, 'g', -1, bits), the shortest text that parses
// back to the same value at that bit size (strconv documentation), so the
// comparison is exact: no tolerance.
func TestPenguinsRoundTrip(t *testing.T) {
	data := opendata.File(t, opendata.Penguins)
	raw := readFile(t, data)
	for _, float := range []string{"32", "64"} {
		t.Run("float"+float, func(t *testing.T) {
			dir := t.TempDir()
			model := filepath.Join(dir, "penguins.model")
			// -missing impute keeps the 2 rows without measurements, so that
			// classify can serve every row of the same file.
			r := mustRun(t, append(penguinArgs(data), "-missing", "impute", "-epochs", "100", "-float", float, "-o", model)...)

			dtype, err := modelfile.ElementType(model)
			if err != nil || dtype != "float"+float {
				t.Fatalf("-float %s saved element type %q (%v)", float, dtype, err)
			}
			var m map[string]any
			if float == "32" {
				m = loadMetrics[float32](t, model)
			} else {
				m = loadMetrics[float64](t, model)
			}
			trainRows, valRows := metric(t, m, "train_rows"), metric(t, m, "validation_rows")
			if trainRows+valRows != penguinRows {
				t.Errorf("%v training + %v validation rows, want all %d rows kept under -missing impute", trainRows, valRows, penguinRows)
			}
			// The default holdout is 0.2: a fifth of 344 is 68.8, and a
			// stratified split rounds per class, so 68 to 70 rows.
			if valRows < 68 || valRows > 70 {
				t.Errorf("%v validation rows, want about a fifth of %d", valRows, penguinRows)
			}
			// What the tool printed is what it saved.
			acc := metric(t, m, "validation_accuracy")
			if got, want := sectionAfter(t, r.stdout, "validation rows:"), fmt.Sprintf("accuracy %.4f on %d rows", acc, int(valRows)); got != want {
				t.Errorf("printed %q, the model file holds %q", got, want)
			}
			// Project-calibrated smoke threshold: the species separate well
			// on bill and flipper measurements, and this network reaches it
			// within 100 epochs; far below it, training or the pipeline is
			// broken. Not a published figure.
			if acc < 0.9 {
				t.Errorf("validation accuracy %.4f, want at least 0.9", acc)
			}

			out := mustRun(t, "classify", "-model", model, "-data", data)
			if float == "32" {
				compareClassify[float32](t, model, raw, out.stdout, 32)
			} else {
				compareClassify[float64](t, model, raw, out.stdout, 64)
			}
		})
	}
}

func loadMetrics[T net.Float](t *testing.T, path string) map[string]any {
	t.Helper()
	m, err := modelfile.Load[T](path)
	if err != nil {
		t.Fatal(err)
	}
	return m.Metrics
}

// compareClassify recomputes classify's output for the CSV text raw with
// the library and requires every class and score to be equal.
func compareClassify[T net.Float](t *testing.T, modelPath, raw, output string, bitSize int) {
	t.Helper()
	m, err := modelfile.Load[T](modelPath)
	if err != nil {
		t.Fatal(err)
	}
	header, rows := readCSV(t, raw)
	outHeader, outRows := readCSV(t, output)
	if len(outRows) != len(rows) {
		t.Fatalf("classify wrote %d rows for %d input rows", len(outRows), len(rows))
	}
	wantHeader := []string{"class"}
	for _, c := range m.Classes {
		wantHeader = append(wantHeader, "score:"+c)
	}
	if !slices.Equal(outHeader, wantHeader) {
		t.Fatalf("classify header %v, want %v", outHeader, wantHeader)
	}
	col := map[string]int{}
	for i, h := range header {
		col[h] = i
	}
	inputs := m.Pipeline.Inputs()
	fields := make([]string, len(inputs))
	feat := make([]float64, m.Pipeline.Width())
	x := make([]T, len(feat))
	for r, row := range rows {
		for i, name := range inputs {
			c, ok := col[name]
			if !ok {
				t.Fatalf("the CSV has no column %q for the model", name)
			}
			fields[i] = row[c]
		}
		if err := m.Pipeline.ApplyStrings(fields, feat); err != nil {
			t.Fatalf("row %d: %v", r+1, err)
		}
		for i, v := range feat {
			x[i] = T(v)
		}
		y := m.Network.Forward(x, 1)
		best := 0
		for j := range y {
			if y[j] > y[best] {
				best = j
			}
		}
		got := outRows[r]
		if got[0] != m.Classes[best] {
			t.Errorf("row %d: classify says %s, the library %s (scores %v)", r+1, got[0], m.Classes[best], y)
		}
		for j := range y {
			v, err := strconv.ParseFloat(got[j+1], bitSize)
			if err != nil {
				t.Fatalf("row %d score %d: %v", r+1, j, err)
			}
			if T(v) != y[j] {
				t.Errorf("row %d score %s: classify %s, the library %v", r+1, m.Classes[j], got[j+1], y[j])
			}
		}
	}
}

// TestPenguinsDropped trains with -missing drop: the 2 rows that lack all
// four measurements are left out. The model then cannot serve those rows
// (nothing was fitted to impute them), and classify must say where the
// first one is.
func TestPenguinsDropped(t *testing.T) {
	data := opendata.File(t, opendata.Penguins)
	raw := readFile(t, data)
	dir := t.TempDir()
	model := filepath.Join(dir, "dropped.model")
	r := mustRun(t, append(penguinArgs(data), "-missing", "drop", "-epochs", "2", "-o", model)...)
	if !strings.Contains(r.stdout, "rows dropped for missing values: 2\n") {
		t.Errorf("train does not report the 2 rows without measurements:\n%s", r.stdout)
	}
	m := loadMetrics[float32](t, model)
	if got := metric(t, m, "train_rows") + metric(t, m, "validation_rows"); got != penguinRows-2 {
		t.Errorf("%v rows kept, want %d", got, penguinRows-2)
	}

	// The first row without bill_length_mm (field 3), found in the file.
	header, rows := readCSV(t, raw)
	if header[2] != "bill_length_mm" {
		t.Fatalf("field 3 is %q", header[2])
	}
	line := 0
	for i, row := range rows {
		if row[2] == "NA" {
			line = i + 2 // the header is line 1
			break
		}
	}
	if line == 0 {
		t.Fatal("no row lacks bill_length_mm")
	}
	c := run(t, nil, "classify", "-model", model, "-data", data)
	want(t, c, exitBadData, at(t, data, raw, line, 3)+" ", `(column "bill_length_mm")`, `"NA"`, "missing value")
}

// TestCheckAgreesWithClassify checks the figures check prints against a
// tally of classify's output and the file's labels. The definitions are
// common practice, no source: accuracy = right/rows; precision =
// TP/(TP+FP); recall = TP/(TP+FN); F1 their harmonic mean. A model trained
// for only 4 epochs is used so that the confusion matrix has errors off
// its diagonal to compare.
func TestCheckAgreesWithClassify(t *testing.T) {
	data := opendata.File(t, opendata.Penguins)
	raw := readFile(t, data)
	dir := t.TempDir()
	model := filepath.Join(dir, "weak.model")
	mustRun(t, append(penguinArgs(data), "-missing", "impute", "-epochs", "4", "-o", model)...)
	m, err := modelfile.Load[float32](model)
	if err != nil {
		t.Fatal(err)
	}
	classes := m.Classes
	index := map[string]int{}
	for i, c := range classes {
		index[c] = i
	}

	// The tally from classify's output against the species column.
	_, rows := readCSV(t, raw)
	_, predicted := readCSV(t, mustRun(t, "classify", "-model", model, "-data", data).stdout)
	if len(predicted) != len(rows) {
		t.Fatalf("classify wrote %d rows for %d", len(predicted), len(rows))
	}
	count := make([][]int, len(classes))
	for i := range count {
		count[i] = make([]int, len(classes))
	}
	right := 0
	for r := range rows {
		truth, ok1 := index[rows[r][0]]
		pred, ok2 := index[predicted[r][0]]
		if !ok1 || !ok2 {
			t.Fatalf("row %d: class %q or %q unknown to the model", r+1, rows[r][0], predicted[r][0])
		}
		count[truth][pred]++
		if truth == pred {
			right++
		}
	}
	if right == len(rows) {
		t.Fatal("the 4-epoch model classifies every row right: the fixture no longer tests the off-diagonal counts; train it less")
	}

	out := mustRun(t, "check", "-model", model, "-data", data).stdout
	lines := strings.Split(out, "\n")
	if want := fmt.Sprintf("accuracy %.4f on %d rows", float64(right)/float64(len(rows)), len(rows)); lines[0] != want {
		t.Errorf("check's first line %q, want %q", lines[0], want)
	}
	ratio := func(a, b int) string {
		if b == 0 {
			return "-"
		}
		return fmt.Sprintf("%.4f", float64(a)/float64(b))
	}
	// Per-class table: a header line after the blank, then one line a
	// class.
	if f := strings.Fields(lines[2]); !slices.Equal(f, []string{"class", "precision", "recall", "F1", "rows"}) {
		t.Fatalf("per-class header %q", lines[2])
	}
	for k, c := range classes {
		tp, pred, sup := count[k][k], 0, 0
		for i := range classes {
			pred += count[i][k]
			sup += count[k][i]
		}
		// F1 is undefined ("-") without a true positive: precision or
		// recall is then 0/0, or both are 0 and F1 is 0/0.
		f1 := "-"
		if tp > 0 {
			p, r := float64(tp)/float64(pred), float64(tp)/float64(sup)
			f1 = fmt.Sprintf("%.4f", 2*p*r/(p+r))
		}
		want := []string{c, ratio(tp, pred), ratio(tp, sup), f1, strconv.Itoa(sup)}
		if got := strings.Fields(lines[3+k]); !slices.Equal(got, want) {
			t.Errorf("per-class line %q, want %v", lines[3+k], want)
		}
	}
	// Confusion matrix: rows are the true class, columns the predicted.
	at := slices.Index(lines, "confusion (rows: true class, columns: predicted)")
	if at < 0 {
		t.Fatalf("check prints no confusion matrix:\n%s", out)
	}
	for i, c := range classes {
		want := []string{c}
		for _, v := range count[i] {
			want = append(want, strconv.Itoa(v))
		}
		if got := strings.Fields(lines[at+2+i]); !slices.Equal(got, want) {
			t.Errorf("confusion row %q, want %v", lines[at+2+i], want)
		}
	}
}

// TestResumeThroughTheCLI checks that a run interrupted at a checkpoint
// and resumed gives the same model, bit for bit, as the run left alone:
// property of the trainer's saved state (the batch order, both random
// sources and the momentum buffers), with momentum and Langevin noise on
// so that each of these matters.
func TestResumeThroughTheCLI(t *testing.T) {
	data := opendata.File(t, opendata.Penguins)
	dir := t.TempDir()
	settings := append(penguinArgs(data), "-missing", "impute", "-momentum", "0.9", "-temp", "1e-6", "-hidden", "16,16")
	path := func(name string) string { return filepath.Join(dir, name) }

	// a: 4 epochs with a checkpoint every 2; b: the same without.
	mustRun(t, append(settings, "-epochs", "4", "-save-every", "2", "-o", path("a.model"))...)
	mustRun(t, append(settings, "-epochs", "4", "-o", path("b.model"))...)
	// x: the first 2 epochs of the same run, checkpointed at their end.
	mustRun(t, append(settings, "-epochs", "2", "-save-every", "2", "-o", path("x.model"))...)

	ckpt := func(name string, epochs int) {
		t.Helper()
		m, err := modelfile.Load[float32](path(name))
		if err != nil {
			t.Fatal(err)
		}
		if m.Checkpoint == nil {
			t.Fatalf("%s holds no trainer state", name)
		}
		// Steps per epoch with batch 32 (the default): ⌈train rows / 32⌉.
		rows := metric(t, loadMetrics[float32](t, path("b.model")), "train_rows")
		perEpoch := int(math.Ceil(rows / 32))
		if m.Checkpoint.Epoch != epochs || m.Checkpoint.Step != epochs*perEpoch || m.Checkpoint.InEpoch != 0 {
			t.Errorf("%s: checkpoint at epoch %d step %d (+%d), want epoch %d step %d", name, m.Checkpoint.Epoch, m.Checkpoint.Step, m.Checkpoint.InEpoch, epochs, epochs*perEpoch)
		}
	}
	ckpt("a.model.checkpoint", 4)
	ckpt("x.model.checkpoint", 2)

	// c: resume x's checkpoint for the remaining 2 epochs. -epochs is the
	// one setting that may be given again.
	r := mustRun(t, "train", "-resume", path("x.model.checkpoint"), "-epochs", "4", "-quiet", "-o", path("c.model"))
	if !strings.Contains(r.stdout, "trained 4 epochs") {
		t.Errorf("resumed run does not report 4 epochs:\n%s", r.stdout)
	}

	classify := func(name string) string {
		t.Helper()
		return mustRun(t, "classify", "-model", path(name), "-data", data).stdout
	}
	b := classify("b.model")
	if a := classify("a.model"); a != b {
		t.Error("writing checkpoints changed the run: a.model and b.model classify differently")
	}
	if c := classify("c.model"); c != b {
		t.Error("the resumed run c.model classifies differently from the uninterrupted b.model")
	}
	if x := classify("x.model"); x == b {
		t.Error("the 2-epoch model classifies exactly like the 4-epoch one: the comparison cannot tell a resumed run from a stopped one")
	}
	mb, err1 := modelfile.Load[float32](path("b.model"))
	mc, err2 := modelfile.Load[float32](path("c.model"))
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	for i, p := range mb.Network.Params() {
		if !slices.Equal(p.Value, mc.Network.Params()[i].Value) {
			t.Errorf("parameter %s differs between the resumed and the uninterrupted run", p.Name)
		}
	}
	for _, k := range []string{"epochs", "steps"} {
		if mb.Metrics[k] != mc.Metrics[k] {
			t.Errorf("metric %s: %v uninterrupted, %v resumed", k, mb.Metrics[k], mc.Metrics[k])
		}
	}
}

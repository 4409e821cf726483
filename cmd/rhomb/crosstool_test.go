package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"log/slog"
	"math"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// TestEveryToolSameBits: for one float32 and one float64 model file and
// the same rows, rhomb classify, rhomb check, the HTTP server (package
// endpoint) and the edge program (examples/edge, built and run with
// -model) give the same answers and the same scores bit for bit, and so
// does the training library's own forward pass on the model's pipeline
// encoding, in the model's element type.
func TestEveryToolSameBits(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the edge program")
	}
	gobin, err := exec.LookPath("go")
	if err != nil {
		t.Skip("go not on PATH: cannot build the edge program")
	}
	dir := t.TempDir()
	edge := filepath.Join(dir, "edge")
	if out, err := exec.Command(gobin, "build", "-o", edge, "github.com/rhomb/rhomb/examples/edge").CombinedOutput(); err != nil {
		t.Fatalf("building the edge program: %v\n%s", err, out)
	}
	csvPath := sensorCSV(t, dir, 200)
	raw := readFile(t, csvPath)
	head, rows := readCSV(t, raw)
	for _, bits := range []int{32, 64} {
		model := filepath.Join(dir, "m"+strconv.Itoa(bits)+".model")
		mustRun(t, "train", "-data", csvPath, "-label", "state", "-hidden", "8,8", "-epochs", "4", "-quiet", "-float", strconv.Itoa(bits), "-o", model)
		c, err := classify.Load(model)
		if err != nil {
			t.Fatal(err)
		}
		if c.Info().DType != "float"+strconv.Itoa(bits) {
			t.Fatalf("-float %d wrote a %s model", bits, c.Info().DType)
		}
		parse := func(s string) float64 {
			t.Helper()
			v, err := strconv.ParseFloat(s, bits) // each tool writes the shortest form of the model's element type or of float64
			if err != nil {
				t.Fatal(err)
			}
			if bits == 32 {
				return float64(float32(v))
			}
			return v
		}

		// The reference: the training library, in the model's element type.
		var want []float64
		var wantClass []string
		if bits == 32 {
			want, wantClass = trainingScores[float32](t, model, raw)
		} else {
			want, wantClass = trainingScores[float64](t, model, raw)
		}

		// rhomb classify.
		_, out := readCSV(t, mustRun(t, "classify", "-model", model, "-data", csvPath).stdout)
		// The server: every row as JSON, by field name.
		var req struct {
			Rows []map[string]any `json:"rows"`
		}
		for _, r := range rows {
			row := map[string]any{}
			for j, h := range head {
				row[h] = r[j]
			}
			req.Rows = append(req.Rows, row)
		}
		body, _ := json.Marshal(req)
		rec := httptest.NewRecorder()
		endpoint.New(c, endpoint.Options{RequestLog: slog.New(slog.DiscardHandler)}).ServeHTTP(rec, httptest.NewRequest(http.MethodPost, "/classify", bytes.NewReader(body)))
		if rec.Code != http.StatusOK {
			t.Fatalf("server: %d %s", rec.Code, rec.Body)
		}
		var resp endpoint.Response
		if err := json.Unmarshal(rec.Body.Bytes(), &resp); err != nil {
			t.Fatal(err)
		}
		// The edge program.
		cmd := exec.Command(edge, "-model", model, "-in", csvPath)
		cmd.Stderr = os.Stderr
		edgeOut, err := cmd.Output()
		if err != nil {
			t.Fatalf("edge: %v", err)
		}
		edgeRows, err := csv.NewReader(bytes.NewReader(edgeOut)).ReadAll()
		if err != nil {
			t.Fatal(err)
		}
		if len(out) != len(rows) || len(resp.Answers) != len(rows) || len(edgeRows) != len(rows) {
			t.Fatalf("float%d: %d rows in, classify %d, server %d, edge %d", bits, len(rows), len(out), len(resp.Answers), len(edgeRows))
		}
		for r := range rows {
			w := want[r]
			got := map[string][2]any{
				"classify": {out[r][0], parse(out[r][1])},
				"server":   {resp.Answers[r].Class, resp.Answers[r].Scores[0]},
				"edge":     {edgeRows[r][0], parse(edgeRows[r][1])},
			}
			for tool, g := range got {
				if g[0] != wantClass[r] || math.Float64bits(g[1].(float64)) != math.Float64bits(w) {
					t.Fatalf("float%d row %d: %s answers %v with score %v; training %s with %v", bits, r, tool, g[0], g[1], wantClass[r], w)
				}
			}
		}
		// rhomb check counts what classify answers: its accuracy is the
		// share of rows whose classify answer is the label.
		right := 0
		for r := range rows {
			if out[r][0] == rows[r][3] {
				right++
			}
		}
		report := mustRun(t, "check", "-model", model, "-data", csvPath).stdout
		if wantAcc := strconv.FormatFloat(float64(right)/float64(len(rows)), 'f', 4, 64); !strings.Contains(report, wantAcc) {
			t.Fatalf("float%d: check does not report accuracy %s (%d of %d, from classify's answers):\n%s", bits, wantAcc, right, len(rows), report)
		}
	}
}

// trainingScores runs the CSV text through the model's pipeline and the
// training library's forward pass in T, and returns each row's score
// widened to float64 and its class name.
func trainingScores[T net.Float](t *testing.T, model, raw string) ([]float64, []string) {
	t.Helper()
	m, err := modelfile.Load[T](model)
	if err != nil {
		t.Fatal(err)
	}
	tb, err := data.ReadCSV(strings.NewReader(raw), "rows.csv", data.CSVOptions{Label: m.Label})
	if err != nil {
		t.Fatal(err)
	}
	rows := make([]int, tb.Rows)
	for i := range rows {
		rows[i] = i
	}
	s, err := data.Encode[T](tb, rows, m.Pipeline, m.Classes)
	if err != nil {
		t.Fatal(err)
	}
	out := m.Network.Forward(s.X, s.Rows)
	scores := make([]float64, s.Rows)
	classes := make([]string, s.Rows)
	// The saved decision's threshold (train chooses one on the validation
	// rows by default): a score above it means the second class.
	threshold := 0.0
	if d := m.Decision; d != nil && d.Threshold != nil {
		threshold = *d.Threshold
	}
	for r := range s.Rows {
		scores[r] = float64(out[r])
		c := 0
		if scores[r] > threshold {
			c = 1
		}
		classes[r] = m.Classes[c]
	}
	return scores, classes
}

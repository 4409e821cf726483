package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/internal/calib"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// reportCell returns the text of the element with the given id in a
// report page (the report prints each of its numbers in one).
func reportCell(t *testing.T, page, id string) string {
	t.Helper()
	m := regexp.MustCompile(`id="` + regexp.QuoteMeta(id) + `">([^<]*)<`).FindStringSubmatch(page)
	if m == nil {
		t.Fatalf("the report has no element %s", id)
	}
	return strings.TrimSpace(m[1])
}

// rhomb train -report on a model whose decision holds a calibration (Platt
// for the two-class sensor table, temperature for the four classes of the
// demo file) writes the calibration section, and the expected calibration
// error it prints is the one computed here, independently of the report's
// code: the saved file loaded from disk with net/classify, the run's own
// validation rows rebuilt from the settings the file records (the split
// is seeded), each row's confidence its largest calibrated probability and
// its outcome whether the answer is its class (as rhomb check counts
// them), and internal/calib.ECE with 15 bins. The report prints four
// significant digits, so the two may differ by half a unit in the fourth.
func TestReportReliability(t *testing.T) {
	for _, tc := range []struct {
		name, method string
		data         func(t *testing.T, dir string) string
		label        string
	}{
		{"two classes", "Platt", func(t *testing.T, dir string) string { return sensorCSV(t, dir, 300) }, "state"},
		{"four classes", "temperature", func(t *testing.T, dir string) string { return demoCSV(t, dir, 300) }, demo.Label},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			csvPath := tc.data(t, dir)
			model, out := filepath.Join(dir, "m.model"), filepath.Join(dir, "r.html")
			mustRun(t, "train", "-quiet", "-data", csvPath, "-label", tc.label, "-hidden", "8", "-epochs", "3", "-test", "0.2",
				"-o", model, "-report", out)
			b, err := os.ReadFile(out)
			if err != nil {
				t.Fatal(err)
			}
			page := string(b)
			for _, s := range []string{`id="calibration"`, `id="fig-reliability"`, "Reliability diagram of the calibrated probabilities",
				"below the diagonal", tc.method + "-calibrated", "no safety guarantee"} {
				if !strings.Contains(page, s) {
					t.Errorf("the report lacks %q", s)
				}
			}

			// The validation rows, rebuilt from the file's own record.
			mf, err := modelfile.Load[float64](model)
			if err != nil {
				t.Fatal(err)
			}
			c := defaultConfig()
			if err := json.Unmarshal(mf.Training, &c); err != nil {
				t.Fatal(err)
			}
			p, err := prepare[float64](&c, nil)
			if err != nil {
				t.Fatal(err)
			}
			if p.val == nil || p.test == nil {
				t.Fatal("the run should have validation and test rows; the report uses the validation rows")
			}
			cm, err := classify.Load(model)
			if err != nil {
				t.Fatal(err)
			}
			if d := cm.Decision(); d == nil || d.Calibration == nil {
				t.Fatal("the saved model holds no calibration")
			}
			answers := make([]classify.Answer, p.val.Rows)
			if err := cm.ClassifyVectors(nil, p.val.X, p.val.Rows, answers); err != nil {
				t.Fatal(err)
			}
			conf := make([]float64, p.val.Rows)
			correct := make([]bool, p.val.Rows)
			for r, a := range answers {
				conf[r], correct[r] = slices.Max(a.Probabilities), a.Class == p.val.Class(r)
			}
			want := calib.ECE(conf, correct, 15)
			for _, id := range []string{"c-ece", "g-ece"} {
				text := reportCell(t, page, id)
				got, err := strconv.ParseFloat(text, 64)
				if err != nil {
					t.Fatalf("%s: %q is not a number", id, text)
				}
				// Half a unit in the fourth significant digit.
				tol := 0.0
				if want != 0 {
					tol = 0.5 * math.Pow(10, math.Floor(math.Log10(math.Abs(want)))-3)
				}
				if math.Abs(got-want) > tol*(1+1e-9) {
					t.Errorf("%s: the report prints ECE %s; from net/classify's answers it is %v", id, text, want)
				}
			}
			if got := reportCell(t, page, "c-rows"); got != strconv.Itoa(p.val.Rows) {
				t.Errorf("the report binned %s rows; the validation split has %d", got, p.val.Rows)
			}
			if got := reportCell(t, page, "c-bins"); got != "15" {
				t.Errorf("%s bins; want 15, as rhomb check uses", got)
			}
			t.Logf("ECE %v on %d validation rows", want, p.val.Rows)
		})
	}
}

// Without a calibration in the saved model (-no-calibration) the report
// has no calibration section, though there are validation rows.
func TestReportWithoutCalibration(t *testing.T) {
	dir := t.TempDir()
	csvPath := sensorCSV(t, dir, 120)
	out := filepath.Join(dir, "r.html")
	mustRun(t, "train", "-quiet", "-data", csvPath, "-label", "state", "-hidden", "8", "-epochs", "2", "-no-calibration",
		"-o", filepath.Join(dir, "m.model"), "-report", out)
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if strings.Contains(string(b), `id="calibration"`) || strings.Contains(string(b), `id="fig-reliability"`) {
		t.Error("a model without a calibration got a calibration section")
	}
}

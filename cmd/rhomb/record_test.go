package main

import (
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/optim/modelfile"
)

// TestRunRecordAndResume: the model and its checkpoint record the data
// file's SHA-256 (checked against crypto/sha256 on the file), the command
// lines and the build; resuming appends to -metrics (epochs numbered from
// 1, as the console numbers them) and to the command lines; and a file
// with the same rows but other labels is refused on resume, where before
// it resumed silently.
func TestRunRecordAndResume(t *testing.T) {
	dir := t.TempDir()
	csvPath := sensorCSV(t, dir, 200)
	model := filepath.Join(dir, "r.model")
	metrics := filepath.Join(dir, "m.jsonl")
	common := []string{"train", "-data", csvPath, "-label", "state", "-hidden", "6", "-quiet", "-o", model, "-metrics", metrics, "-save-every", "1", "-patience", "-1"}
	mustRun(t, append(common, "-epochs", "2")...)
	mustRun(t, "train", "-resume", model+".checkpoint", "-epochs", "4", "-o", model, "-metrics", metrics, "-quiet")

	raw, err := os.ReadFile(csvPath)
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(raw)
	m, err := modelfile.Load[float32](model)
	if err != nil {
		t.Fatal(err)
	}
	var rec struct {
		Run runRecord `json:"run"`
	}
	if err := json.Unmarshal(m.Training, &rec); err != nil {
		t.Fatal(err)
	}
	if len(rec.Run.Data) != 1 || rec.Run.Data[0].SHA256 != hex.EncodeToString(sum[:]) || rec.Run.Data[0].Bytes != int64(len(raw)) {
		t.Fatalf("data record %+v; want the file's SHA-256 %x and %d bytes", rec.Run.Data, sum, len(raw))
	}
	if len(rec.Run.Commands) != 2 || !strings.Contains(strings.Join(rec.Run.Commands[1], " "), "-resume") || rec.Run.Library == "" || rec.Run.Go == "" {
		t.Fatalf("commands %q, library %q, go %q", rec.Run.Commands, rec.Run.Library, rec.Run.Go)
	}

	f, err := os.Open(metrics)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var epochs []int
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r metricsRecord
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatalf("%s: %v", sc.Text(), err)
		}
		if r.Kind != "epoch" || !(float64(r.TrainAcc) >= 0) || !(float64(r.ValAcc) >= 0) || !(float64(r.Rho) > 0) {
			t.Fatalf("record %s lacks what the console shows", sc.Text())
		}
		epochs = append(epochs, r.Epoch)
	}
	if jsonInts(epochs) != "[1,2,3,4]" {
		t.Fatalf("epochs in -metrics %v; want 1, 2 from the first run and 3, 4 appended by the resumed one", epochs)
	}

	// Same rows, labels swapped: the run must not resume on them.
	swapped := strings.NewReplacer(",on\n", ",off\n", ",off\n", ",on\n").Replace(string(raw))
	if err := os.WriteFile(csvPath, []byte(swapped), 0o644); err != nil {
		t.Fatal(err)
	}
	r := run(t, nil, "train", "-resume", model+".checkpoint", "-epochs", "5", "-o", model, "-quiet")
	want(t, r, exitBadData, "-data", "is not the data the run", "SHA-256")
}

func jsonInts(v []int) string {
	b, _ := json.Marshal(v)
	return string(b)
}

// TestServedMarginsRecorded: the saved model records its training rows'
// normalized margins as served (the figures a server shows beside the
// live rows' histogram), in the order quantiles must have: min ≤ p05 ≤
// p50 ≤ p95, and min ≤ mean (a margin is a distance, never negative).
func TestServedMarginsRecorded(t *testing.T) {
	dir := t.TempDir()
	_, model := sensorModel(t, dir)
	m, err := modelfile.Load[float32](model)
	if err != nil {
		t.Fatal(err)
	}
	get := func(k string) float64 {
		v, ok := m.Metrics[k].(float64)
		if !ok {
			t.Fatalf("the model records no %s: %v", k, m.Metrics)
		}
		return v
	}
	lo, p05, p50, p95, mean := get("margin_min"), get("margin_p05"), get("margin_p50"), get("margin_p95"), get("margin_mean")
	if !(lo >= 0 && lo <= p05 && p05 <= p50 && p50 <= p95 && lo <= mean && p50 > 0) {
		t.Fatalf("margins min %v, p05 %v, p50 %v, p95 %v, mean %v: out of order", lo, p05, p50, p95, mean)
	}
}

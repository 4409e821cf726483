package report_test

import (
	"bytes"
	"encoding/base64"
	"image/png"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/optim/gauge/plot"
	"github.com/rhomb/rhomb/optim/gauge/report"
)

// A worked example, by hand: 60 validation rows in three of five equal
// bins,
//
//	[0.4, 0.6): 10 rows, mean probability 0.55, accuracy 0.6
//	[0.6, 0.8): 10 rows, mean probability 0.7,  accuracy 0.6
//	[0.8, 1]:   40 rows, mean probability 0.9,  accuracy 0.85
//
// ECE = (10·0.05 + 10·0.1 + 40·0.05)/60 = 3.5/60 = 0.058333…; the
// uncalibrated map, 10 rows at 0.7 (accuracy 0.6) and 50 at 0.95
// (accuracy 0.8): ECE = (10·0.1 + 50·0.15)/60 = 8.5/60 = 0.141666….
func handCalibration() *plot.Calibration {
	return &plot.Calibration{Set: "validation", Method: "temperature",
		Bins: []plot.ReliabilityBin{
			{Lo: 0, Hi: 0.2}, {Lo: 0.2, Hi: 0.4},
			{Lo: 0.4, Hi: 0.6, Rows: 10, Confidence: 0.55, Accuracy: 0.6},
			{Lo: 0.6, Hi: 0.8, Rows: 10, Confidence: 0.7, Accuracy: 0.6},
			{Lo: 0.8, Hi: 1, Rows: 40, Confidence: 0.9, Accuracy: 0.85},
		},
		Uncalibrated: []plot.ReliabilityBin{
			{Lo: 0, Hi: 0.2}, {Lo: 0.2, Hi: 0.4}, {Lo: 0.4, Hi: 0.6},
			{Lo: 0.6, Hi: 0.8, Rows: 10, Confidence: 0.7, Accuracy: 0.6},
			{Lo: 0.8, Hi: 1, Rows: 50, Confidence: 0.95, Accuracy: 0.8},
		},
		Note: "A note from the caller.",
	}
}

// A Run with calibration data has the calibration section: the ECEs
// worked out above (in its table, in the summary and in the figure's
// caption), the rows and bins, and the reliability diagram as a PNG that
// decodes; the cautions are still all there.
func TestCalibrationSection(t *testing.T) {
	demoRun, _ := demoReport(t)
	r := *demoRun
	r.Calibration = handCalibration()
	var b bytes.Buffer
	if err := report.Write(&b, &r); err != nil {
		t.Fatal(err)
	}
	doc := parse(t, b.Bytes())
	sec := doc.byID("calibration")
	if sec == nil {
		t.Fatal("no calibration section")
	}
	cell := func(id string) string {
		n := doc.byID(id)
		if n == nil {
			t.Fatalf("no element %s", id)
		}
		return n.text.String()
	}
	shown(t, "c-ece", cell("c-ece"), 3.5/60)
	shown(t, "c-raw-ece", cell("c-raw-ece"), 8.5/60)
	shown(t, "g-ece", cell("g-ece"), 3.5/60)
	if got := strings.TrimSpace(cell("c-rows")); got != "60" {
		t.Errorf("rows %q; want 60", got)
	}
	if got := strings.TrimSpace(cell("c-bins")); got != "5" {
		t.Errorf("bins %q; want 5", got)
	}
	fig := doc.byID("fig-reliability")
	if fig == nil {
		t.Fatal("no reliability figure")
	}
	caption := fig.text.String()
	for _, s := range []string{"Expected calibration error 0.05833 on 60 validation rows", "0.1417 for the uncalibrated", "below the diagonal", "overconfident", "A note from the caller."} {
		if !strings.Contains(caption, s) {
			t.Errorf("the caption lacks %q: %s", s, caption)
		}
	}
	imgs := fig.all("img")
	if len(imgs) != 1 {
		t.Fatalf("%d images in the figure; want 1", len(imgs))
	}
	const prefix = "data:image/png;base64,"
	src := imgs[0].attr["src"]
	raw, err := base64.StdEncoding.DecodeString(strings.TrimPrefix(src, prefix))
	if err != nil || !strings.HasPrefix(src, prefix) {
		t.Fatalf("the figure's src is not a base64 PNG data URI: %v", err)
	}
	if _, err := png.Decode(bytes.NewReader(raw)); err != nil {
		t.Fatalf("the figure's PNG does not decode: %v", err)
	}
	// The History's seven figures and this one.
	if n := len(doc.all("img")); n != 8 {
		t.Errorf("%d images; want 8", n)
	}
	caut := doc.byID("cautions").text.String()
	for _, c := range report.DefaultCautions {
		if !strings.Contains(caut, c) {
			t.Errorf("caution missing: %.50s…", c)
		}
	}

	// Without uncalibrated bins the table has no uncalibrated row.
	r.Calibration.Uncalibrated = nil
	b.Reset()
	if err := report.Write(&b, &r); err != nil {
		t.Fatal(err)
	}
	if doc := parse(t, b.Bytes()); doc.byID("c-raw-ece") != nil || doc.byID("c-ece") == nil {
		t.Error("without uncalibrated bins: want c-ece and no c-raw-ece")
	}

	// Bins without rows are an error, not an empty section.
	r.Calibration = &plot.Calibration{Bins: make([]plot.ReliabilityBin, 15)}
	if err := report.Write(&b, &r); err == nil {
		t.Error("Write accepted calibration bins without rows")
	}
}

// A Run without calibration data has no calibration section, figure or
// summary line.
func TestNoCalibrationSection(t *testing.T) {
	r, page := demoReport(t)
	if r.Calibration != nil {
		t.Fatal("the demo run has calibration data; this test needs a run without")
	}
	doc := parse(t, page)
	for _, id := range []string{"calibration", "fig-reliability", "g-ece", "c-ece"} {
		if doc.byID(id) != nil {
			t.Errorf("element %s present in a report without calibration data", id)
		}
	}
	if bytes.Contains(page, []byte("Calibration of the probabilities")) {
		t.Error("the calibration heading is present in a report without calibration data")
	}
}

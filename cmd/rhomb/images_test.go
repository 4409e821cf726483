package main

import (
	"path/filepath"
	"regexp"
	"strconv"
	"testing"

	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// TestImagesThroughThePipeline trains on the 10,000 Fashion-MNIST test
// images (REFERENCES.md) with -images and checks that the model carries a
// preprocessing pipeline of 784 pixel columns, as a CSV file of the same
// pixels would give, and that check -images applies it: it scores all
// 10,000 rows, at an accuracy a broken encoding could not reach.
//
// The accuracy floor, 0.70, is a regression guard, not a published
// figure: the best linear model of the benchmark reaches 0.842 trained on
// all 60,000 images (REFERENCES.md, Fashion-MNIST); two epochs on 8,000 of
// them stay below that, and an encoding that does not match training
// scores near chance, 0.10.
func TestImagesThroughThePipeline(t *testing.T) {
	images := opendata.File(t, opendata.FashionTestImage)
	labels := opendata.File(t, opendata.FashionTestLabel)
	model := filepath.Join(t.TempDir(), "images.model")
	mustRun(t, "train", "-images", images, "-labels", labels, "-hidden", "32", "-epochs", "2", "-quiet", "-o", model)
	m, err := modelfile.Load[float32](model)
	if err != nil {
		t.Fatal(err)
	}
	if m.Pipeline == nil || len(m.Pipeline.Encodings) != 784 || m.Pipeline.Encodings[0].Name != "p0" {
		t.Fatalf("the model's pipeline %v; want 784 pixel columns p0 … p783", m.Pipeline)
	}
	r := mustRun(t, "check", "-model", model, "-images", images, "-labels", labels)
	got := regexp.MustCompile(`accuracy ([0-9.]+) on ([0-9]+) rows`).FindStringSubmatch(r.stdout)
	if got == nil {
		t.Fatalf("check printed no accuracy:\n%s", r.stdout)
	}
	acc, _ := strconv.ParseFloat(got[1], 64)
	if got[2] != "10000" || acc < 0.70 {
		t.Errorf("check -images: accuracy %v on %s rows; want all 10000 rows and at least 0.70", acc, got[2])
	}
}

package data_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
)

func TestValidate(t *testing.T) {
	good := data.Set[float64]{X: []float64{1, 2, 3, 4, 5, 6}, Y: []float64{1, -1, 1}, Rows: 3, Features: 2, Outputs: 1}
	if err := good.Validate(); err != nil {
		t.Fatal(err)
	}
	bad := good
	bad.X = []float64{1, 2, 3, math.NaN(), 5, 6}
	var re *data.RowError
	if err := bad.Validate(); !errors.As(err, &re) || re.Row != 1 || re.Column != 1 || re.Field != "X" {
		t.Errorf("NaN at row 1 column 1: %v", err)
	}
	short := good
	short.Y = short.Y[:2]
	if err := short.Validate(); err == nil || !strings.Contains(err.Error(), "3×1") {
		t.Errorf("short targets: %v", err)
	}
}

func TestClass(t *testing.T) {
	if data.ClassOf([]float64{-1}) != 0 || data.ClassOf([]float64{1}) != 1 || data.ClassOf([]float64{0, 0, 1, 0}) != 2 {
		t.Error("ClassOf")
	}
}

func TestSubset(t *testing.T) {
	s := data.Set[float64]{X: []float64{1, 2, 3, 4, 5, 6}, Y: []float64{0, 1, 1, 0, 0, 1}, Rows: 3, Features: 2, Outputs: 2}
	sub := s.Subset([]int{2, 0})
	if sub.Rows != 2 || sub.X[0] != 5 || sub.X[3] != 2 || sub.Y[1] != 1 || sub.Y[2] != 0 {
		t.Errorf("subset %+v", sub)
	}
	if l := s.Labels(); l[0] != 1 || l[1] != 0 || l[2] != 1 {
		t.Errorf("labels %v", l)
	}
}

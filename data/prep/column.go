package prep

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Kind is the type of a feature column.
type Kind int

const (
	// Auto lets a reader decide: a column is Numeric if its first
	// non-missing value parses as a number, Categorical otherwise.
	Auto Kind = iota
	Numeric
	Categorical
)

func (k Kind) String() string {
	switch k {
	case Auto:
		return "auto"
	case Numeric:
		return "numeric"
	case Categorical:
		return "categorical"
	}
	return fmt.Sprintf("Kind(%d)", int(k))
}

// MarshalText and UnmarshalText write a Kind as its name in model files.
func (k Kind) MarshalText() ([]byte, error) { return []byte(k.String()), nil }

func (k *Kind) UnmarshalText(b []byte) error {
	switch string(b) {
	case "auto":
		*k = Auto
	case "numeric":
		*k = Numeric
	case "categorical":
		*k = Categorical
	default:
		return fmt.Errorf("prep: unknown column kind %q", b)
	}
	return nil
}

// Column is one feature column of a table. Exactly one of Num and Cat is
// used, by Kind. Missing[r] reports that row r held a missing-value
// marker; Num[r] is then NaN and Cat[r] "".
type Column struct {
	Name    string
	Kind    Kind // Numeric or Categorical, never Auto
	Num     []float64
	Cat     []string
	Missing []bool
}

// DefaultMissing are the cell values read as missing unless a reader is
// told otherwise. Comparison ignores surrounding spaces.
var DefaultMissing = []string{"", "NA", "NaN", "null"}

// IsMissing reports whether s, trimmed of spaces, is one of markers.
func IsMissing(s string, markers []string) bool {
	s = strings.TrimSpace(s)
	for _, m := range markers {
		if s == m {
			return true
		}
	}
	return false
}

// ParseNumber parses a numeric cell. Training readers and the serving path
// both parse with it, so the same text gives the same bits. It rejects
// infinities (ErrInfinite) and text that is not a decimal number
// (ErrNotNumber); "NaN" is not a number here — list it among the missing
// markers instead, as DefaultMissing does.
func ParseNumber(s string) (float64, error) {
	s = strings.TrimSpace(s)
	v, err := strconv.ParseFloat(s, 64)
	switch {
	case err != nil && errors.Is(err, strconv.ErrRange) && math.IsInf(v, 0):
		return 0, ErrInfinite
	case err != nil:
		return 0, ErrNotNumber
	case math.IsInf(v, 0):
		return 0, ErrInfinite
	case math.IsNaN(v):
		return 0, ErrNotNumber
	}
	return v, nil
}

// Sentinel errors shared by the readers and the pipeline.
var (
	ErrEmpty           = errors.New("no rows to read: the file is empty, has only a header, or every row was dropped")
	ErrDuplicateHeader = errors.New("duplicate column name in the header")
	ErrNoLabel         = errors.New("no column of that name in the header")
	ErrRagged          = errors.New("wrong number of fields")
	ErrMissing         = errors.New("missing value")
	ErrNotNumber       = errors.New("not a number in a numeric column")
	ErrInfinite        = errors.New("infinite value")
	ErrOneClass        = errors.New("the label column has only one class")
	ErrUnknownCategory = errors.New("category not seen in training")
	ErrUnknownField    = errors.New("no such field in the model's inputs")
)

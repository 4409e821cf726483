package prep

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// Options says how Fit builds a Pipeline. The zero value standardizes every
// numeric column, one-hot encodes every categorical column, imputes
// nothing (a missing value is an error), treats a category not seen in
// training as an error, and recognizes DefaultMissing as missing-value
// markers when serving.
type Options struct {
	// Impute fills missing values instead of rejecting them: with the mean
	// of a numeric column, with the most frequent category of a
	// categorical one (ties go to the first in sorted order). Both are
	// fitted on the training rows only, so nothing about the validation or
	// test rows leaks into the model. False: a missing value in a training
	// row makes Fit fail, and one met later makes Apply fail with
	// ErrMissing.
	Impute bool
	// NoStandardize passes numeric values through unchanged. False: each
	// numeric column is centred on its training mean and divided by its
	// training standard deviation, which keeps the inputs of a bias-free
	// network on a common scale.
	NoStandardize bool
	// UnitNorm scales every encoded row to unit Euclidean norm after
	// encoding, so that the network's output depends on the direction of
	// the input only (a bias-free ReLU network is positively homogeneous
	// in its input). A row of zeros stays zero. False: rows are left as
	// encoded.
	UnitNorm bool
	// ZeroUnseen encodes a category not seen in training as a one-hot
	// block of zeros, so serving keeps answering when a new category
	// appears. False: such a value is an error wrapping ErrUnknownCategory.
	ZeroUnseen bool
	// Missing are the cell values that the serving path (ApplyStrings,
	// ApplyMap) reads as missing; they should be the markers the training
	// data was read with. Nil means DefaultMissing; an empty, non-nil
	// slice means no marker at all.
	Missing []string
	// LevelCap, when positive, bounds the one-hot block of a categorical
	// column with many levels. A column with more than LevelCap distinct
	// categories on the training rows keeps the LevelCap most frequent of
	// them (of equal counts, the byte-wise smaller first) and gets one
	// more feature, "other", which is 1 for every other value: a training
	// category beyond the kept ones, and also a category never seen in
	// training, which is then not an error and not a block of zeros,
	// whatever ZeroUnseen says. A column with at most LevelCap
	// categories is encoded exactly as without the cap. The most frequent
	// category, the fill value when imputing, is always kept. 0 keeps
	// every category; a negative value is an error.
	LevelCap int
}

// Pipeline is a fitted preprocessing: one Encoding per input column, in the
// order of the columns it was fitted on, turning the raw cells of a row
// into Width features.
//
// It is stored inside model files as JSON. All its state is in exported
// fields, and encoding/json writes every float64 in its shortest form that
// parses back to the same bits, so a decoded Pipeline gives bit-identical
// features. Call Validate on one decoded from a file before use.
//
// The training path (ApplyColumns) and the serving paths (ApplyStrings,
// ApplyMap) pass each value through the same encoder, so the same cell
// gives the same bits in both. A Pipeline is safe for concurrent use once
// built, and its Apply methods allocate nothing unless they fail.
type Pipeline struct {
	Encodings []Encoding `json:"encodings"`
	// The settings of Options, as fitted.
	Impute     bool     `json:"impute"`
	UnitNorm   bool     `json:"unit_norm"`
	ZeroUnseen bool     `json:"zero_unseen"`
	Missing    []string `json:"missing"`
}

// UnmarshalJSON decodes a pipeline strictly (a field this type does not
// have is an error), and also reads the field names of files written
// before they were renamed: "steps" for "encodings" and
// "unknown_as_zeros" for "zero_unseen".
func (p *Pipeline) UnmarshalJSON(b []byte) error {
	type fields Pipeline // the same fields, without this method
	var aux struct {
		fields
		Steps          []Encoding `json:"steps"`
		UnknownAsZeros *bool      `json:"unknown_as_zeros"`
	}
	d := json.NewDecoder(bytes.NewReader(b))
	d.DisallowUnknownFields()
	if err := d.Decode(&aux); err != nil {
		return err
	}
	if aux.Steps != nil {
		if aux.Encodings != nil {
			return errors.New(`prep: the pipeline has both "encodings" and the older "steps"`)
		}
		aux.Encodings = aux.Steps
	}
	if aux.UnknownAsZeros != nil {
		aux.ZeroUnseen = aux.ZeroUnseen || *aux.UnknownAsZeros
	}
	*p = Pipeline(aux.fields)
	return nil
}

// Encoding is the fitted encoding of one input column.
//
// A numeric value x becomes one feature (x − Mean)/Scale. When the
// pipeline standardizes, Mean is the mean of the column over the training
// rows and Scale its sample standard deviation (divisor n − 1), but never
// less than SpreadFloor times the column's range (max − min) over the
// training rows, so that no training value's feature exceeds 1/SpreadFloor
// = 20 in magnitude: a nearly constant column (a pixel that is dark in all
// but a few images, a flag that is almost never set) would otherwise turn
// its rare values into features in the hundreds. A column that is constant
// on the training rows, or has a single training value, has no spread to
// divide by and gets Scale 1, so its feature is 0 on the training rows.
// Without standardizing, Mean is 0 and Scale 1.
//
// A categorical value becomes a one-hot block with the 1 at the value's
// index in Categories, which holds the categories of the training rows in
// sorted (byte-wise) order. Surrounding spaces of a cell are ignored, as by
// IsMissing and ParseNumber. The block has len(Categories) features, and
// one more when OtherLevels is positive (see Options.LevelCap).
type Encoding struct {
	Name  string  `json:"name"`
	Kind  Kind    `json:"kind"`
	Mean  float64 `json:"mean"`
	Scale float64 `json:"scale"`
	// Fill is the raw value put in place of a missing numeric value when
	// the pipeline imputes: the training mean. 0 otherwise.
	Fill float64 `json:"fill"`
	// FillCategory is the category put in place of a missing categorical
	// value when the pipeline imputes: the most frequent on the training
	// rows. "" otherwise.
	FillCategory string   `json:"fill_category,omitempty"`
	Categories   []string `json:"categories,omitempty"`
	// OtherLevels is, for a column whose levels were capped when fitting,
	// the number of distinct training categories left out of Categories.
	// When it is positive the block ends with one more feature, "other",
	// after the features of Categories; it is 1 for every value not in
	// Categories, be it one of those levels or a category never seen in
	// training (never an unknown-category error). 0, as in every pipeline
	// fitted without a cap: no such feature.
	OtherLevels int `json:"other_levels,omitempty"`
}

// OtherName follows "column=" in the name of a capped column's "other"
// feature (FeatureNames): "site= (other)". A category never has
// surrounding spaces (Fit trims them, and Validate refuses a capped step
// whose categories have them), so the leading space keeps the name apart
// from the column's "column=category" features whatever the categories
// are.
const OtherName = " (other)"

// Width returns the number of features the step writes: 1 for a numeric
// column, the size of the one-hot block for a categorical one.
func (s *Encoding) Width() int {
	if s.Kind == Categorical {
		if s.OtherLevels > 0 {
			return len(s.Categories) + 1
		}
		return len(s.Categories)
	}
	return 1
}

// FieldError reports a value that could not be encoded, or a training
// column that could not be fitted. Row is the table row for Fit and
// ApplyColumns, and -1 on the serving paths, which see one row at a time.
// Value is the cell as read ("" when there is none). Err is a sentinel of
// this package (ErrMissing, ErrNotNumber, ErrInfinite, ErrUnknownCategory,
// ErrUnknownField, ErrRagged), possibly wrapped; errors.Is finds it.
type FieldError struct {
	Field string
	Row   int
	Value string
	Err   error
}

func (e *FieldError) Error() string {
	var b strings.Builder
	b.WriteString("prep: ")
	if e.Field != "" {
		fmt.Fprintf(&b, "field %q", e.Field)
	} else {
		b.WriteString("input")
	}
	if e.Row >= 0 {
		fmt.Fprintf(&b, ", row %d", e.Row)
	}
	if e.Value != "" {
		fmt.Fprintf(&b, ": value %q", e.Value)
	}
	b.WriteString(": ")
	b.WriteString(e.Err.Error())
	if h := hint(e.Err); h != "" {
		b.WriteString("; ")
		b.WriteString(h)
	}
	return b.String()
}

func (e *FieldError) Unwrap() error { return e.Err }

// hint says what to do about an error.
func hint(err error) string {
	switch {
	case errors.Is(err, ErrMissing):
		return "supply a value, drop the row, or use a model trained to fill in missing values"
	case errors.Is(err, ErrUnknownCategory):
		return "check the spelling, or retrain with rows that hold this category or with unseen categories encoded as zeros"
	case errors.Is(err, ErrNotNumber):
		return "the field is numeric: give a decimal number such as 2.5, or a missing-value marker"
	case errors.Is(err, ErrInfinite):
		return "give finite numbers, small enough in size to be centred and scaled in float64"
	case errors.Is(err, ErrUnknownField):
		return "give only the model's input fields, under their names"
	case errors.Is(err, ErrRagged):
		return "give one field per model input, in the model's input order"
	}
	return ""
}

// errOverflow is returned when a finite value leaves float64's range once
// centred and scaled; allocated once so the error path of Apply is cheap.
var errOverflow = fmt.Errorf("%w after centring and scaling (the value is far outside the training data's range)", ErrInfinite)

// Fit fits a pipeline to the feature columns cols on the training rows
// rows (row indices into the columns; nil means every row). Only the
// training rows are looked at, so statistics of held-out rows cannot leak
// into the model; held-out rows are then encoded with ApplyColumns.
//
// Every column must be Numeric or Categorical, have a unique, non-empty
// name and the same number of rows; a row is missing in a column when
// Column.Missing says so, when a numeric value is NaN, or when a
// categorical cell is one of the pipeline's missing markers. Fit fails
// with a *FieldError when a training row is missing and Options.Impute is
// false, when a numeric value is infinite, and when a column has no
// non-missing training value.
//
// Fitting a categorical column holds one count per distinct training
// category (and, with a level cap, a list of the kept ones), never
// anything per row and category.
func Fit(cols []Column, rows []int, o Options) (*Pipeline, error) {
	if len(cols) == 0 {
		return nil, errors.New("prep: Fit: no feature columns")
	}
	if o.LevelCap < 0 {
		return nil, fmt.Errorf("prep: Fit: the level cap is %d; give a positive number of categories to keep per column, or 0 to keep them all", o.LevelCap)
	}
	n := colLen(&cols[0])
	seen := make(map[string]bool, len(cols))
	for i := range cols {
		c := &cols[i]
		if c.Name == "" {
			return nil, fmt.Errorf("prep: Fit: column %d has no name; name every column, since serving finds fields by name", i)
		}
		if seen[c.Name] {
			return nil, &FieldError{Field: c.Name, Row: -1, Err: ErrDuplicateHeader}
		}
		seen[c.Name] = true
		if c.Kind != Numeric && c.Kind != Categorical {
			return nil, fmt.Errorf("prep: Fit: column %q has kind %v; want numeric or categorical (a reader resolves auto)", c.Name, c.Kind)
		}
		if m := colLen(c); m != n {
			return nil, fmt.Errorf("prep: Fit: column %q has %d rows, column %q has %d; columns of one table must have equal length", c.Name, m, cols[0].Name, n)
		}
		if c.Missing != nil && len(c.Missing) != n {
			return nil, fmt.Errorf("prep: Fit: column %q has %d values and %d missing flags; want one flag per row (or none)", c.Name, n, len(c.Missing))
		}
	}
	if rows == nil {
		rows = make([]int, n)
		for r := range rows {
			rows[r] = r
		}
	}
	if len(rows) == 0 {
		return nil, errors.New("prep: Fit: no training rows; pass nil for all rows")
	}
	for _, r := range rows {
		if r < 0 || r >= n {
			return nil, fmt.Errorf("prep: Fit: training row %d out of range [0, %d)", r, n)
		}
	}

	p := &Pipeline{
		Encodings:  make([]Encoding, len(cols)),
		Impute:     o.Impute,
		UnitNorm:   o.UnitNorm,
		ZeroUnseen: o.ZeroUnseen,
	}
	markers := o.Missing
	if markers == nil {
		markers = DefaultMissing
	}
	p.Missing = make([]string, len(markers))
	copy(p.Missing, markers)

	for i := range cols {
		var err error
		if cols[i].Kind == Numeric {
			p.Encodings[i], err = fitNumeric(&cols[i], rows, o)
		} else {
			p.Encodings[i], err = fitCategorical(&cols[i], rows, o, p.Missing)
		}
		if err != nil {
			return nil, err
		}
	}
	return p, nil
}

func colLen(c *Column) int {
	if c.Kind == Categorical {
		return len(c.Cat)
	}
	return len(c.Num)
}

func flagged(c *Column, r int) bool { return c.Missing != nil && c.Missing[r] }

func fitNumeric(c *Column, rows []int, o Options) (Encoding, error) {
	s := Encoding{Name: c.Name, Kind: Numeric, Scale: 1}
	// Mean shifted by the first value: exact for a constant column (so it
	// gets variance 0, not rounding noise), and accurate when the values
	// are large compared with their spread.
	var shift, sum float64
	m := 0
	for _, r := range rows {
		x := c.Num[r]
		if flagged(c, r) || math.IsNaN(x) {
			if !o.Impute {
				return s, &FieldError{Field: c.Name, Row: r, Value: "NaN", Err: ErrMissing}
			}
			continue
		}
		if math.IsInf(x, 0) {
			return s, &FieldError{Field: c.Name, Row: r, Value: strconv.FormatFloat(x, 'g', -1, 64), Err: ErrInfinite}
		}
		if m == 0 {
			shift = x
		}
		sum += x - shift
		m++
	}
	if m == 0 {
		return s, &FieldError{Field: c.Name, Row: -1, Err: fmt.Errorf("%w in every training row: nothing to fit", ErrMissing)}
	}
	mean := shift + sum/float64(m)
	// The squared deviations are summed relative to the largest one, big,
	// so that a column of values near 1e200 or 1e-200 does not overflow
	// or underflow to a spread of Inf or 0: sd = big·√(Σ(d/big)²/(m−1)).
	var big, ss float64
	for _, r := range rows {
		if x := c.Num[r]; !flagged(c, r) && !math.IsNaN(x) {
			big = max(big, math.Abs(x-mean))
		}
	}
	if big > 0 {
		for _, r := range rows {
			if x := c.Num[r]; !flagged(c, r) && !math.IsNaN(x) {
				d := (x - mean) / big
				ss += d * d
			}
		}
	}
	sd := 0.0
	if m > 1 {
		sd = big * math.Sqrt(ss/float64(m-1))
	}
	if math.IsInf(mean, 0) || math.IsNaN(mean) || math.IsInf(sd, 0) || math.IsNaN(sd) {
		return s, &FieldError{Field: c.Name, Row: -1, Err: fmt.Errorf("%w: the mean or spread of the training values overflows float64; rescale the column", ErrInfinite)}
	}
	if o.Impute {
		s.Fill = mean
	}
	if !o.NoStandardize {
		s.Mean = mean
		if sd > 0 {
			lo, hi := math.Inf(1), math.Inf(-1)
			for _, r := range rows {
				if x := c.Num[r]; !flagged(c, r) && !math.IsNaN(x) {
					lo, hi = min(lo, x), max(hi, x)
				}
			}
			s.Scale = max(sd, SpreadFloor*(hi-lo))
		}
	}
	return s, nil
}

// SpreadFloor is the least Scale of a standardized numeric column, as a
// fraction of its training range (see Encoding). For normally distributed
// values the range of n rows is about 6.5 standard deviations at n = 10³
// and 9 at n = 10⁵ (the expected range of a normal sample; common
// practice, no source), so the floor, a twentieth of the range, leaves
// such columns alone and acts only on columns whose spread is dominated by
// a few values.
const SpreadFloor = 1.0 / 20

func fitCategorical(c *Column, rows []int, o Options, markers []string) (Encoding, error) {
	s := Encoding{Name: c.Name, Kind: Categorical, Scale: 1}
	count := map[string]int{}
	for _, r := range rows {
		v := c.Cat[r]
		if flagged(c, r) || IsMissing(v, markers) {
			if !o.Impute {
				return s, &FieldError{Field: c.Name, Row: r, Value: v, Err: ErrMissing}
			}
			continue
		}
		count[strings.TrimSpace(v)]++
	}
	if len(count) == 0 {
		return s, &FieldError{Field: c.Name, Row: -1, Err: fmt.Errorf("%w in every training row: no category to encode", ErrMissing)}
	}
	if o.LevelCap > 0 && len(count) > o.LevelCap {
		s.Categories = mostFrequent(count, o.LevelCap)
		s.OtherLevels = len(count) - o.LevelCap
	} else {
		s.Categories = make([]string, 0, len(count))
		for v := range count {
			s.Categories = append(s.Categories, v)
		}
	}
	slices.Sort(s.Categories)
	if o.Impute {
		// The most frequent category ranks first, so a capped column keeps it.
		best := -1
		for _, v := range s.Categories { // sorted: the first of tied counts wins
			if count[v] > best {
				best, s.FillCategory = count[v], v
			}
		}
	}
	return s, nil
}

// level is a category and its count on the training rows.
type level struct {
	v string
	n int
}

// before reports whether a ranks before b among a column's levels: more
// frequent, or as frequent and byte-wise smaller. It orders distinct
// categories totally, so the levels kept do not depend on the order a map
// is visited in.
func before(a, b level) bool { return a.n > b.n || (a.n == b.n && a.v < b.v) }

// mostFrequent returns the k first-ranked categories of count, k <
// len(count), in no particular order. It keeps them in a binary heap whose
// root is the last-ranked of them (Williams' heap, common practice, no
// source), so it holds k levels beside the map, not one per category.
func mostFrequent(count map[string]int, k int) []string {
	h := make([]level, 0, k)
	for v, n := range count {
		l := level{v, n}
		if len(h) < k {
			h = append(h, l)
			for i := len(h) - 1; i > 0; { // sift up: a parent ranks after its children
				up := (i - 1) / 2
				if !before(h[up], h[i]) {
					break
				}
				h[up], h[i] = h[i], h[up]
				i = up
			}
			continue
		}
		if !before(l, h[0]) {
			continue
		}
		h[0] = l
		for i := 0; ; { // sift down
			last := i
			if c := 2*i + 1; c < len(h) && before(h[last], h[c]) {
				last = c
			}
			if c := 2*i + 2; c < len(h) && before(h[last], h[c]) {
				last = c
			}
			if last == i {
				break
			}
			h[i], h[last] = h[last], h[i]
			i = last
		}
	}
	out := make([]string, len(h))
	for i := range h {
		out[i] = h[i].v
	}
	return out
}

// Validate checks a pipeline decoded from a file: every encoding numeric or
// categorical with a unique non-empty name, finite Mean and Fill, a finite
// positive Scale, and non-empty, sorted, distinct Categories. An encoding with
// OtherLevels set must moreover be categorical, with a positive count,
// categories free of surrounding spaces, and, when the pipeline imputes,
// its FillCategory among its Categories. The Apply methods assume a valid
// pipeline.
func (p *Pipeline) Validate() error {
	if len(p.Encodings) == 0 {
		return errors.New("prep: pipeline has no encodings")
	}
	seen := map[string]bool{}
	for i := range p.Encodings {
		s := &p.Encodings[i]
		bad := func(what string) error {
			return fmt.Errorf("prep: pipeline encoding %d (%q): %s; the model file is damaged or was not written by this package", i, s.Name, what)
		}
		switch {
		case s.Name == "":
			return bad("no name")
		case seen[s.Name]:
			return bad("duplicate name")
		case s.Kind != Numeric && s.Kind != Categorical:
			return bad("kind " + s.Kind.String())
		case !finite(s.Mean) || !finite(s.Fill):
			return bad("mean or fill not finite")
		case !finite(s.Scale) || !(s.Scale > 0):
			return bad("scale not finite and positive")
		}
		seen[s.Name] = true
		if s.Kind == Categorical {
			if len(s.Categories) == 0 {
				return bad("no categories")
			}
			for j := 1; j < len(s.Categories); j++ {
				if !(s.Categories[j-1] < s.Categories[j]) {
					return bad("categories not sorted and distinct")
				}
			}
		}
		if s.OtherLevels == 0 {
			continue
		}
		// A capped column: checked only here, so that a file without the
		// cap validates exactly as before it existed.
		switch {
		case s.OtherLevels < 0:
			return bad("a negative count of levels beyond the kept categories")
		case s.Kind != Categorical:
			return bad("levels beyond the kept categories on a column that is not categorical")
		}
		for _, c := range s.Categories {
			if strings.TrimSpace(c) != c {
				return bad(fmt.Sprintf("category %q has surrounding spaces", c))
			}
		}
		if _, ok := slices.BinarySearch(s.Categories, s.FillCategory); p.Impute && !ok {
			return bad(fmt.Sprintf("the fill category %q is not among the kept categories", s.FillCategory))
		}
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// Width returns the number of features a row encodes to.
func (p *Pipeline) Width() int {
	w := 0
	for i := range p.Encodings {
		w += p.Encodings[i].Width()
	}
	return w
}

// FeatureNames returns the name of every feature, in order: the column
// name for a numeric column, "column=category" for each one-hot feature
// (for example "site=north-yard"), and "column= (other)" (OtherName) for
// the last feature of a column whose levels were capped.
func (p *Pipeline) FeatureNames() []string {
	out := make([]string, 0, p.Width())
	for i := range p.Encodings {
		s := &p.Encodings[i]
		if s.Kind == Categorical {
			for _, c := range s.Categories {
				out = append(out, s.Name+"="+c)
			}
			if s.OtherLevels > 0 {
				out = append(out, s.Name+"="+OtherName)
			}
		} else {
			out = append(out, s.Name)
		}
	}
	return out
}

// Inputs returns the names of the input columns, in the order ApplyStrings
// expects the fields.
func (p *Pipeline) Inputs() []string {
	out := make([]string, len(p.Encodings))
	for i := range p.Encodings {
		out[i] = p.Encodings[i].Name
	}
	return out
}

// ApplyColumns encodes row of the table columns cols, which must be the
// columns the pipeline was fitted on (same names, kinds and order), into
// the first Width values of dst. It is the training path; held-out rows of
// the same table go through it too. On error dst holds partial output.
//
// It panics when dst is shorter than Width or row is out of range, and
// returns an error when cols do not match the pipeline's inputs.
func (p *Pipeline) ApplyColumns(cols []Column, row int, dst []float64) error {
	dst = p.dst(dst)
	if len(cols) != len(p.Encodings) {
		return &FieldError{Row: row, Err: fmt.Errorf("%w: %d columns, the pipeline has %d inputs", ErrRagged, len(cols), len(p.Encodings))}
	}
	at := 0
	for i := range p.Encodings {
		s, c := &p.Encodings[i], &cols[i]
		if c.Name != s.Name || c.Kind != s.Kind {
			return &FieldError{Field: c.Name, Row: row, Err: fmt.Errorf("%w: column %d is %q (%v), the pipeline expects %q (%v) there; read the data with the training columns in their order", ErrUnknownField, i, c.Name, c.Kind, s.Name, s.Kind)}
		}
		if row < 0 || row >= colLen(c) {
			panic(fmt.Sprintf("prep: ApplyColumns: row %d out of range [0, %d) of column %q", row, colLen(c), c.Name))
		}
		w := s.Width()
		var err error
		if s.Kind == Numeric {
			x := c.Num[row]
			err = p.encodeNumber(s, x, flagged(c, row) || math.IsNaN(x), dst[at:at+w])
			if err != nil {
				return &FieldError{Field: s.Name, Row: row, Value: strconv.FormatFloat(x, 'g', -1, 64), Err: err}
			}
		} else {
			v := c.Cat[row]
			if err = p.encodeCategory(s, v, flagged(c, row) || IsMissing(v, p.Missing), dst[at:at+w]); err != nil {
				return &FieldError{Field: s.Name, Row: row, Value: v, Err: err}
			}
		}
		at += w
	}
	p.finish(dst)
	return nil
}

// ApplyStrings encodes one row given as raw cell strings, one per input in
// the order of Inputs, into the first Width values of dst: the serving
// path. Numeric cells are parsed with ParseNumber, and a cell is missing
// when IsMissing(cell, p.Missing). It panics when dst is shorter than
// Width. On error dst holds partial output.
func (p *Pipeline) ApplyStrings(fields []string, dst []float64) error {
	dst = p.dst(dst)
	if len(fields) != len(p.Encodings) {
		return &FieldError{Row: -1, Err: fmt.Errorf("%w: %d fields, the model has %d inputs", ErrRagged, len(fields), len(p.Encodings))}
	}
	at := 0
	for i := range p.Encodings {
		s := &p.Encodings[i]
		w := s.Width()
		if err := p.encodeCell(s, fields[i], IsMissing(fields[i], p.Missing), dst[at:at+w]); err != nil {
			return &FieldError{Field: s.Name, Row: -1, Value: fields[i], Err: err}
		}
		at += w
	}
	p.finish(dst)
	return nil
}

// ApplyMap encodes one row given as raw cell strings by input name into the
// first Width values of dst, like ApplyStrings. An input absent from fields
// is missing: an error wrapping ErrMissing, or imputed when the pipeline
// imputes. A key that names no input is an error wrapping ErrUnknownField,
// so a misspelt name is not silently taken as missing. It panics when dst
// is shorter than Width. On error dst holds partial output.
func (p *Pipeline) ApplyMap(fields map[string]string, dst []float64) error {
	dst = p.dst(dst)
	found := 0
	for i := range p.Encodings {
		if _, ok := fields[p.Encodings[i].Name]; ok {
			found++
		}
	}
	if found < len(fields) {
		var extra []string
		for k := range fields {
			if !slices.ContainsFunc(p.Encodings, func(s Encoding) bool { return s.Name == k }) {
				extra = append(extra, k)
			}
		}
		slices.Sort(extra)
		return &FieldError{Field: extra[0], Row: -1, Err: ErrUnknownField}
	}
	at := 0
	for i := range p.Encodings {
		s := &p.Encodings[i]
		w := s.Width()
		v, ok := fields[s.Name]
		if !ok && !p.Impute {
			return &FieldError{Field: s.Name, Row: -1, Err: fmt.Errorf("%w: the row has no field of this name", ErrMissing)}
		}
		if err := p.encodeCell(s, v, !ok || IsMissing(v, p.Missing), dst[at:at+w]); err != nil {
			return &FieldError{Field: s.Name, Row: -1, Value: v, Err: err}
		}
		at += w
	}
	p.finish(dst)
	return nil
}

// dst checks the length of dst and returns its first Width values.
func (p *Pipeline) dst(dst []float64) []float64 {
	w := p.Width()
	if len(dst) < w {
		panic(fmt.Sprintf("prep: destination holds %d values, the pipeline writes %d (Width)", len(dst), w))
	}
	return dst[:w]
}

// encodeCell parses a raw cell of a numeric step and encodes it; a
// categorical cell goes to encodeCategory as it is.
func (p *Pipeline) encodeCell(s *Encoding, cell string, missing bool, dst []float64) error {
	if s.Kind == Categorical {
		return p.encodeCategory(s, cell, missing, dst)
	}
	var x float64
	if !missing {
		var err error
		if x, err = ParseNumber(cell); err != nil {
			return err
		}
	}
	return p.encodeNumber(s, x, missing, dst)
}

// encodeNumber is the one encoder of numeric values, shared by the
// training and serving paths. dst has length 1.
func (p *Pipeline) encodeNumber(s *Encoding, x float64, missing bool, dst []float64) error {
	if missing {
		if !p.Impute {
			return ErrMissing
		}
		x = s.Fill
	}
	if math.IsInf(x, 0) {
		return ErrInfinite
	}
	v := (x - s.Mean) / s.Scale
	if !finite(v) {
		return errOverflow
	}
	dst[0] = v
	return nil
}

// encodeCategory is the one encoder of categorical values, shared by the
// training and serving paths. dst has length s.Width().
func (p *Pipeline) encodeCategory(s *Encoding, v string, missing bool, dst []float64) error {
	clear(dst)
	if missing {
		if !p.Impute {
			return ErrMissing
		}
		v = s.FillCategory
	}
	j, ok := slices.BinarySearch(s.Categories, strings.TrimSpace(v))
	switch {
	case ok:
		dst[j] = 1
	case s.OtherLevels > 0:
		dst[len(s.Categories)] = 1 // the "other" feature
	case !p.ZeroUnseen:
		return ErrUnknownCategory
	}
	return nil
}

// finish applies the row-wise steps after every column is encoded.
func (p *Pipeline) finish(dst []float64) {
	if p.UnitNorm {
		unitNorm(dst)
	}
}

// unitNorm divides v by its Euclidean norm, leaving a zero vector as it is.
// The norm is taken of v/max|v_i|, as in the reference BLAS nrm2, so that
// squaring neither overflows nor underflows, and each element is divided
// in two steps, (v_i/big)/√s, neither of which can overflow.
func unitNorm(v []float64) {
	var big float64
	for _, x := range v {
		big = max(big, math.Abs(x))
	}
	if big == 0 {
		return
	}
	var s float64
	for _, x := range v {
		y := x / big
		s += y * y
	}
	r := math.Sqrt(s)
	for i, x := range v {
		v[i] = x / big / r
	}
}

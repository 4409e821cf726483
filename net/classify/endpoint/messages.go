package endpoint

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"reflect"
	"strings"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net/classify"
)

// The messages here are for HTTP clients: they name JSON keys, fields and
// routes, never the Go identifiers behind them.

// prepIsMissing reports whether the cell v is one of the pipeline's
// missing-value markers, as the pipeline itself decides.
func prepIsMissing(v string, p *prep.Pipeline) bool { return prep.IsMissing(v, p.Missing) }

// rowFail answers 400 for a row that could not be classified, naming the
// row and, where there is one, the field and its value.
func (h *Handler) rowFail(w http.ResponseWriter, row int, err error) {
	d := ErrorDetail{Row: &row}
	var fe *prep.FieldError
	if errors.As(err, &fe) {
		d.Field, d.Value = fe.Field, fe.Value
	}
	d.Message = rowMessage(d.Field, err)
	h.fail(w, http.StatusBadRequest, d)
}

func rowMessage(field string, err error) string {
	what := "the row"
	if field != "" {
		what = fmt.Sprintf("field %q", field)
	}
	switch {
	case errors.Is(err, prep.ErrMissing):
		return what + " is missing (absent, null or a missing-value marker), and this model does not fill in missing values: give a value"
	case errors.Is(err, prep.ErrNotNumber):
		return what + " is numeric: give a number such as 2.5, a string holding one, or null"
	case errors.Is(err, prep.ErrInfinite):
		return what + " is infinite, or so far outside the training data's range that it overflows"
	case errors.Is(err, prep.ErrUnknownCategory):
		return what + " holds a category that the training data did not have; check its spelling"
	case errors.Is(err, prep.ErrUnknownField):
		return what + ` is none of the model's inputs (GET /model lists them under "inputs")`
	case errors.Is(err, prep.ErrRagged):
		return what + ` has the wrong number of values (GET /model lists the features under "features")`
	case errors.Is(err, classify.ErrOutput):
		return "the model's output for this row is not a finite number: its values are probably far outside the training data's range"
	}
	return what + " cannot be classified"
}

// jsonMessage turns a decoding error of the request body into a message
// about the JSON.
func jsonMessage(err error) string {
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.Is(err, io.EOF):
		return `empty body: give {"rows": [{"field": value, ...}, ...]}`
	case errors.Is(err, io.ErrUnexpectedEOF):
		return "bad JSON: the body ends inside a value"
	case errors.As(err, &se):
		return fmt.Sprintf("bad JSON at byte %d: %s", se.Offset, strings.TrimPrefix(se.Error(), "json: "))
	case errors.As(err, &te):
		where := "the top level"
		if te.Field != "" {
			where = fmt.Sprintf("%q", te.Field)
		}
		k := te.Type.Kind()
		if strings.HasPrefix(te.Value, "number") && (k == reflect.Float64 || k == reflect.Float32) {
			return fmt.Sprintf("bad JSON: %s in %s is outside the range of a 64-bit float", te.Value, where)
		}
		return fmt.Sprintf("bad JSON: %s in %s; want %s", te.Value, where, jsonKind(k))
	}
	if key, ok := strings.CutPrefix(err.Error(), "json: unknown field "); ok {
		return fmt.Sprintf(`unknown key %s in the request; give "rows" or "vectors"`, key)
	}
	return "bad JSON"
}

// jsonKind names the JSON value that a Go kind decodes from.
func jsonKind(k reflect.Kind) string {
	switch k {
	case reflect.Slice, reflect.Array:
		return "an array"
	case reflect.Map, reflect.Struct:
		return "an object"
	case reflect.String:
		return "a string"
	case reflect.Bool:
		return "true or false"
	}
	return "a number"
}

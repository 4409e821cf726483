package endpoint

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"runtime"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net/classify"
)

// Options are the handler's limits. The zero value of each field is a
// documented default, so Options{} works.
type Options struct {
	// MaxBodyBytes caps a request body (http.MaxBytesReader); a larger
	// body gets 413. Zero means 1 MiB.
	MaxBodyBytes int64
	// MaxRows caps the rows of one request; more get 400. Zero means 1000.
	MaxRows int
	// Timeout bounds one request, reading the body included; a request
	// that runs out of time gets 503. Zero means 5 s.
	Timeout time.Duration
	// MaxInFlight is the number of classify requests served at once. A
	// request beyond it is refused at once with 503 and Retry-After, not
	// queued, so that overload cannot build an unbounded backlog. Zero
	// means 4·GOMAXPROCS.
	MaxInFlight int
	// Log receives model swaps, refused model files and server errors.
	// Nil means slog.Default().
	Log *slog.Logger
}

func (o Options) withDefaults() Options {
	if o.MaxBodyBytes <= 0 {
		o.MaxBodyBytes = 1 << 20
	}
	if o.MaxRows <= 0 {
		o.MaxRows = 1000
	}
	if o.Timeout <= 0 {
		o.Timeout = 5 * time.Second
	}
	if o.MaxInFlight <= 0 {
		o.MaxInFlight = 4 * runtime.GOMAXPROCS(0)
	}
	if o.Log == nil {
		o.Log = slog.Default()
	}
	return o
}

// served is one model with its pool of work buffers. A request takes the
// current served once and uses it to the end, so a swap never changes the
// model under a request.
type served struct {
	m    *classify.Model
	pool sync.Pool // *classify.Work for m
}

func newServed(m *classify.Model) *served {
	s := &served{m: m}
	s.pool.New = func() any { return m.NewWork() }
	return s
}

// Handler serves one model over HTTP: see the package documentation for
// the routes and their JSON. It is safe for concurrent use, and Swap and
// Reload may be called while it serves.
type Handler struct {
	cur  atomic.Pointer[served]
	opts Options
	sem  chan struct{}
	mux  *http.ServeMux
}

// New returns a handler serving m.
func New(m *classify.Model, o Options) *Handler {
	if m == nil {
		panic("endpoint: New: nil model")
	}
	h := &Handler{opts: o.withDefaults(), mux: http.NewServeMux()}
	h.sem = make(chan struct{}, h.opts.MaxInFlight)
	h.cur.Store(newServed(m))
	h.mux.HandleFunc("POST /classify", h.classify)
	h.mux.HandleFunc("GET /model", h.info)
	h.mux.HandleFunc("GET /health", h.health)
	return h
}

func (h *Handler) ServeHTTP(w http.ResponseWriter, r *http.Request) { h.mux.ServeHTTP(w, r) }

// Model returns the model being served.
func (h *Handler) Model() *classify.Model { return h.cur.Load().m }

// Swap serves m from now on. Requests already running finish with the
// model they started with.
func (h *Handler) Swap(m *classify.Model) {
	if m == nil {
		panic("endpoint: Swap: nil model")
	}
	old := h.cur.Swap(newServed(m))
	h.opts.Log.Info("model swapped", "old_version", old.m.Info().Version, "new_version", m.Info().Version, "source", m.Info().Source)
}

// Reload loads the model file at path and, once it has fully validated,
// swaps it in. A file that fails to load leaves the current model serving;
// the reason is logged and returned.
func (h *Handler) Reload(path string) error {
	m, err := classify.Load(path)
	if err != nil {
		h.opts.Log.Error("model file refused; the current model keeps serving", "path", path, "version", h.Model().Info().Version, "err", err)
		return err
	}
	if old := h.Model(); !sameStrings(old.Inputs(), m.Inputs()) || old.Features() != m.Features() {
		h.opts.Log.Warn("the new model takes different inputs", "old", old.Inputs(), "new", m.Inputs())
	}
	h.Swap(m)
	return nil
}

func sameStrings(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// Request is the body of POST /classify: rows by field name, or feature
// vectors for a model without preprocessing. A field's value is a JSON
// string (the cell as it would appear in the training file), a number, or
// null for a missing value.
type Request struct {
	Rows    []map[string]json.RawMessage `json:"rows,omitempty"`
	Vectors [][]float64                  `json:"vectors,omitempty"`
}

// Response is the body of a successful POST /classify.
type Response struct {
	ModelVersion string       `json:"model_version"`
	Classes      []string     `json:"classes,omitempty"`
	Predictions  []Prediction `json:"predictions"`
}

// Prediction is the verdict on one row. Scores are the network's outputs
// in class order; a ±1 binary model has one score, positive for the
// second class.
type Prediction struct {
	Class      string    `json:"class,omitempty"`
	ClassIndex int       `json:"class_index"`
	Scores     []float64 `json:"scores"`
}

// Error is the body of every error response.
type Error struct {
	Error ErrorDetail `json:"error"`
}

// ErrorDetail says what was wrong and where: the row (from 0) and field of
// a bad row, absent when the problem is not in one row.
type ErrorDetail struct {
	Message string `json:"message"`
	Row     *int   `json:"row,omitempty"`
	Field   string `json:"field,omitempty"`
	Value   string `json:"value,omitempty"`
}

func (h *Handler) reply(w http.ResponseWriter, status int, v any) {
	var b bytes.Buffer
	if err := json.NewEncoder(&b).Encode(v); err != nil {
		h.opts.Log.Error("encoding a response", "err", err)
		status = http.StatusInternalServerError
		b.Reset()
		b.WriteString(`{"error":{"message":"internal error encoding the response"}}` + "\n")
	}
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(status)
	w.Write(b.Bytes())
}

func (h *Handler) fail(w http.ResponseWriter, status int, d ErrorDetail) {
	if status == http.StatusServiceUnavailable {
		w.Header().Set("Retry-After", "1")
	}
	h.reply(w, status, Error{d})
}

// rowFail turns a row's error into a 400 naming the row and field.
func (h *Handler) rowFail(w http.ResponseWriter, row int, err error) {
	d := ErrorDetail{Message: err.Error(), Row: &row}
	var fe *prep.FieldError
	if errors.As(err, &fe) {
		d.Field, d.Value = fe.Field, fe.Value
	}
	h.fail(w, http.StatusBadRequest, d)
}

func (h *Handler) classify(w http.ResponseWriter, r *http.Request) {
	select {
	case h.sem <- struct{}{}:
		defer func() { <-h.sem }()
	default:
		h.fail(w, http.StatusServiceUnavailable, ErrorDetail{Message: fmt.Sprintf("overloaded: %d requests in flight; retry later", h.opts.MaxInFlight)})
		return
	}
	ctx, cancel := context.WithTimeout(r.Context(), h.opts.Timeout)
	defer cancel()
	// Bound the body read by the same deadline; a ResponseWriter that
	// cannot (httptest's recorder) leaves the server's own timeouts.
	_ = http.NewResponseController(w).SetReadDeadline(time.Now().Add(h.opts.Timeout))

	s := h.cur.Load()
	m := s.m
	var req Request
	dec := json.NewDecoder(http.MaxBytesReader(w, r.Body, h.opts.MaxBodyBytes))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&req); err != nil {
		var mbe *http.MaxBytesError
		switch {
		case errors.As(err, &mbe):
			h.fail(w, http.StatusRequestEntityTooLarge, ErrorDetail{Message: fmt.Sprintf("request body larger than %d bytes", mbe.Limit)})
		case ctx.Err() != nil:
			h.fail(w, http.StatusServiceUnavailable, ErrorDetail{Message: "timed out reading the request"})
		default:
			h.fail(w, http.StatusBadRequest, ErrorDetail{Message: "bad JSON: " + err.Error()})
		}
		return
	}
	if dec.More() {
		h.fail(w, http.StatusBadRequest, ErrorDetail{Message: "bad JSON: more than one value in the body"})
		return
	}
	n := len(req.Rows) + len(req.Vectors)
	switch {
	case len(req.Rows) > 0 && len(req.Vectors) > 0:
		h.fail(w, http.StatusBadRequest, ErrorDetail{Message: `give "rows" or "vectors", not both`})
		return
	case n == 0:
		h.fail(w, http.StatusBadRequest, ErrorDetail{Message: `no rows: give {"rows": [{"field": value, ...}, ...]}`})
		return
	case n > h.opts.MaxRows:
		h.fail(w, http.StatusBadRequest, ErrorDetail{Message: fmt.Sprintf("%d rows exceed the limit of %d per request; split the batch", n, h.opts.MaxRows)})
		return
	case len(req.Rows) > 0 && m.Pipeline() == nil:
		h.fail(w, http.StatusBadRequest, ErrorDetail{Message: `this model has no preprocessing: give "vectors" of features`})
		return
	}

	work := s.pool.Get().(*classify.Work)
	defer s.pool.Put(work)
	resp := Response{ModelVersion: m.Info().Version, Classes: m.Classes(), Predictions: make([]Prediction, n)}
	cells := make(map[string]string, len(m.Inputs()))
	for i := range n {
		if i%64 == 0 && ctx.Err() != nil {
			h.fail(w, http.StatusServiceUnavailable, ErrorDetail{Message: fmt.Sprintf("timed out after %d of %d rows", i, n)})
			return
		}
		var a classify.Answer
		var err error
		if req.Vectors != nil {
			a, err = m.ClassifyVector(work, req.Vectors[i])
		} else {
			clear(cells)
			for k, raw := range req.Rows[i] {
				v, missing, err := cellOf(raw)
				if err != nil {
					h.rowFail(w, i, &prep.FieldError{Field: k, Row: -1, Value: string(raw), Err: err})
					return
				}
				if !missing {
					cells[k] = v
				}
			}
			a, err = m.ClassifyMap(work, cells)
		}
		if err != nil {
			h.rowFail(w, i, err)
			return
		}
		resp.Predictions[i] = Prediction{Class: a.Label, ClassIndex: a.Class, Scores: append([]float64(nil), a.Scores...)}
	}
	h.reply(w, http.StatusOK, resp)
}

var errCellType = errors.New("a field's value must be a string, a number or null")

// cellOf returns a field's value as the text a CSV cell would hold:
// strings as they are, numbers as written in the JSON (parsed later by
// prep.ParseNumber, as the training file's cells were), null as missing.
func cellOf(raw json.RawMessage) (string, bool, error) {
	t := bytes.TrimSpace(raw)
	switch {
	case len(t) == 0:
		return "", false, errCellType
	case string(t) == "null":
		return "", true, nil
	case t[0] == '"':
		var s string
		if err := json.Unmarshal(t, &s); err != nil {
			return "", false, err
		}
		return s, false, nil
	case t[0] == '-' || (t[0] >= '0' && t[0] <= '9'):
		return string(t), false, nil
	}
	return "", false, errCellType
}

func (h *Handler) info(w http.ResponseWriter, r *http.Request) {
	m := h.Model()
	type node struct {
		Name string `json:"name"`
		Kind string `json:"kind"`
		In   int    `json:"in"`
		Out  int    `json:"out"`
	}
	type info struct {
		classify.Info
		Graph    []node   `json:"graph"`
		Features []string `json:"features"`
	}
	i := info{Info: m.Info(), Features: m.FeatureNames()}
	for _, n := range m.Info().Graph {
		i.Graph = append(i.Graph, node{n.Name, n.Kind, n.In, n.Out})
	}
	h.reply(w, http.StatusOK, i)
}

func (h *Handler) health(w http.ResponseWriter, r *http.Request) {
	h.reply(w, http.StatusOK, map[string]any{
		"status": "ok", "model_version": h.Model().Info().Version,
		"in_flight": len(h.sem), "max_in_flight": cap(h.sem),
	})
}

// String describes the handler's limits, for a server's start-up log.
func (h *Handler) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "body ≤ %d bytes, ≤ %d rows, timeout %v, ≤ %d in flight", h.opts.MaxBodyBytes, h.opts.MaxRows, h.opts.Timeout, h.opts.MaxInFlight)
	return b.String()
}

package endpoint

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/rhomb/rhomb/net/classify"
)

// Options are the handler's limits and switches. The zero value of each
// field is a documented default, so Options{} works.
type Options struct {
	// MaxBodyBytes caps a request body (http.MaxBytesReader); a larger
	// body gets 413. Zero means 1 MiB.
	MaxBodyBytes int64
	// MaxRows caps the rows of one request; more get 400. Zero means 1000.
	MaxRows int
	// BodyTimeout bounds the reading of a POST /classify body, from the
	// moment the handler starts; a body not complete by then gets 408 and
	// the connection is closed. The body is read before the request takes
	// one of the MaxInFlight places, so a client that sends slowly holds
	// none of them. The deadline is set with
	// http.ResponseController.SetReadDeadline, which replaces the server's
	// ReadTimeout for that body; a ResponseWriter that cannot set it (a
	// test recorder) leaves the server's own timeouts. Zero means 10 s.
	BodyTimeout time.Duration
	// Timeout bounds the work on one request once its body has been read:
	// decoding and classifying. A request that runs out of time gets 503.
	// Zero means 5 s.
	Timeout time.Duration
	// MaxInFlight is the number of classify requests worked on at once. A
	// request beyond it is refused at once with 503 and Retry-After, not
	// queued, so that overload cannot build an unbounded backlog. Zero
	// means 4·GOMAXPROCS.
	MaxInFlight int
	// RefuseUnknownFields makes a row field that is none of the model's
	// inputs a 400 naming the row and the field. By default such a field
	// is ignored, as the command line ignores extra columns, and listed in
	// the response's "ignored_fields".
	RefuseUnknownFields bool
	// Tokens, when not empty, are the bearer tokens (RFC 6750) that POST
	// /classify and GET /model require in an "Authorization: Bearer …"
	// header; GET /health stays open. A request without a token that
	// matches gets 401 with a WWW-Authenticate: Bearer challenge. A token
	// is written in the RFC's token alphabet (letters, digits, - . _ ~ + /
	// and trailing =); New panics on any other.
	// SetTokens replaces them while the handler serves.
	Tokens []string
	// Observer, when not nil, is told of every request and every model
	// change; see Observer.
	Observer *Observer
	// Log receives model swaps, refused model files and server errors.
	// Nil means slog.Default().
	Log *slog.Logger
	// RequestLog receives one record per request (see the package
	// documentation). Nil means Log; slog.New(slog.DiscardHandler) turns
	// the records off.
	RequestLog *slog.Logger
}

func (o Options) withDefaults() Options {
	if o.MaxBodyBytes <= 0 {
		o.MaxBodyBytes = 1 << 20
	}
	if o.MaxRows <= 0 {
		o.MaxRows = 1000
	}
	if o.BodyTimeout <= 0 {
		o.BodyTimeout = 10 * time.Second
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
	if o.RequestLog == nil {
		o.RequestLog = o.Log
	}
	return o
}

// served is one model with its pool of work buffers. A request takes the
// current served once and uses it to the end, so a swap never changes the
// model under a request.
type served struct {
	m      *classify.Model
	pool   sync.Pool           // *classify.Work for m
	inputs map[string]struct{} // the pipeline's input fields
}

func newServed(m *classify.Model) *served {
	s := &served{m: m, inputs: make(map[string]struct{}, len(m.Inputs()))}
	s.pool.New = func() any { return m.NewWork() }
	for _, in := range m.Inputs() {
		s.inputs[in] = struct{}{}
	}
	return s
}

// Handler serves one model over HTTP: see the package documentation for
// the routes and their JSON. It is safe for concurrent use, and Swap,
// Reload and SetTokens may be called while it serves.
type Handler struct {
	cur    atomic.Pointer[served]
	tokens atomic.Pointer[tokenSet]
	opts   Options
	sem    chan struct{}
}

// testHookAcquired, when set by a test, runs while a classify request
// holds its in-flight place.
var testHookAcquired func()

// New returns a handler serving m. It panics when m is nil or a token of
// o.Tokens is not a valid bearer token.
func New(m *classify.Model, o Options) *Handler {
	if m == nil {
		panic("endpoint: New: nil model")
	}
	h := &Handler{opts: o.withDefaults()}
	h.sem = make(chan struct{}, h.opts.MaxInFlight)
	if err := h.SetTokens(o.Tokens); err != nil {
		panic("endpoint: New: " + err.Error())
	}
	h.cur.Store(newServed(m))
	return h
}

// route is one path the handler answers, with its methods.
type route struct {
	path    string
	allow   string // the Allow header of a 405
	methods []string
	open    bool // no token needed
	serve   func(*Handler, *tracked, *http.Request)
}

var routes = []route{
	{"/classify", "POST", []string{"POST"}, false, (*Handler).classify},
	{"/model", "GET, HEAD", []string{"GET", "HEAD"}, false, (*Handler).info},
	{"/health", "GET, HEAD", []string{"GET", "HEAD"}, true, (*Handler).health},
}

// ServeHTTP answers the routes of the package documentation; any other
// path gets 404 and another method 405 with an Allow header, both with
// the JSON error body.
func (h *Handler) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	t := &tracked{ResponseWriter: w, start: time.Now()}
	defer h.finish(t, r)
	i := slices.IndexFunc(routes, func(rt route) bool { return rt.path == r.URL.Path })
	if i < 0 {
		h.fail(t, http.StatusNotFound, ErrorDetail{Message: fmt.Sprintf("no route %s; the routes are POST /classify, GET /model and GET /health", r.URL.Path)})
		return
	}
	rt := &routes[i]
	t.route = rt.path
	if !slices.Contains(rt.methods, r.Method) {
		t.Header().Set("Allow", rt.allow)
		h.fail(t, http.StatusMethodNotAllowed, ErrorDetail{Message: fmt.Sprintf("method %s not allowed on %s; use %s", r.Method, rt.path, rt.allow)})
		return
	}
	if !rt.open && !h.authorized(t, r) {
		return
	}
	rt.serve(h, t, r)
}

// Model returns the model being served.
func (h *Handler) Model() *classify.Model { return h.cur.Load().m }

// Swap serves m from now on. Requests already running finish with the
// model they started with.
func (h *Handler) Swap(m *classify.Model) {
	if m == nil {
		panic("endpoint: Swap: nil model")
	}
	h.swap(m, "", 0)
}

func (h *Handler) swap(m *classify.Model, path string, took time.Duration) {
	old := h.cur.Swap(newServed(m))
	h.opts.Log.Info("model swapped", "old_version", old.m.Info().Version, "new_version", m.Info().Version, "source", m.Info().Source)
	if o := h.opts.Observer; o != nil && o.Reload != nil {
		o.Reload(ReloadInfo{Path: path, OldVersion: old.m.Info().Version, Version: m.Info().Version, Model: m, LoadTime: took})
	}
}

// Reload loads the model file at path and, once it has fully validated,
// swaps it in. A file that fails to load leaves the current model serving;
// the reason is logged and returned.
func (h *Handler) Reload(path string) error {
	t0 := time.Now()
	m, err := classify.Load(path)
	took := time.Since(t0)
	if err != nil {
		cur := h.Model()
		h.opts.Log.Error("model file refused; the current model keeps serving", "path", path, "version", cur.Info().Version, "err", err)
		if o := h.opts.Observer; o != nil && o.Reload != nil {
			o.Reload(ReloadInfo{Path: path, OldVersion: cur.Info().Version, Version: cur.Info().Version, Model: cur, LoadTime: took, Err: err})
		}
		return err
	}
	if old := h.Model(); !slices.Equal(old.Inputs(), m.Inputs()) || old.Features() != m.Features() {
		h.opts.Log.Warn("the new model takes different inputs", "old", old.Inputs(), "new", m.Inputs())
	}
	h.swap(m, path, took)
	return nil
}

// Request is the body of POST /classify: rows by field name, or feature
// vectors for a model without preprocessing. A field's value is a JSON
// string (the cell as it would appear in the training file), a number, or
// null for a missing value.
type Request struct {
	Rows    []map[string]json.RawMessage `json:"rows,omitempty"`
	Vectors [][]float64                  `json:"vectors,omitempty"`
}

// Response is the body of a successful POST /classify. IgnoredFields
// lists, sorted, the row fields that are none of the model's inputs and
// were left out (absent when there were none).
type Response struct {
	ModelVersion  string   `json:"model_version"`
	Classes       []string `json:"classes,omitempty"`
	Answers       []Answer `json:"answers"`
	IgnoredFields []string `json:"ignored_fields,omitempty"`
}

// Answer is the verdict on one row. Scores are the network's outputs in
// class order; a ±1 binary model has one score, positive for the second
// class. FilledFields lists, in input order, the fields that the row left
// missing (absent, null or a missing-value marker) and that the model's
// preprocessing filled in with its training value; it is absent when
// none was.
//
// When the model file holds them (docs/model-file.md, "Decision"),
// Probabilities are the calibrated class probabilities in class order,
// Set is the prediction set (class names), and NoAnswer is true where the
// model abstains (Class then still says what the answer would be).
type Answer struct {
	Class         string    `json:"class,omitempty"`
	ClassIndex    int       `json:"class_index"`
	Scores        []float64 `json:"scores"`
	Margin        float64   `json:"margin"`
	Probabilities []float64 `json:"probabilities,omitempty"`
	Set           []string  `json:"set,omitempty"`
	NoAnswer      bool      `json:"no_answer,omitempty"`
	FilledFields  []string  `json:"filled_fields,omitempty"`
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

// bodyError is why a body could not be read: the status and message.
type bodyError struct {
	status int
	msg    string
}

// readBody reads the whole body under its own deadline and size limit.
func (h *Handler) readBody(w *tracked, r *http.Request) ([]byte, *bodyError) {
	rc := http.NewResponseController(w)
	deadlineSet := rc.SetReadDeadline(time.Now().Add(h.opts.BodyTimeout)) == nil
	var b bytes.Buffer
	if n := r.ContentLength; n > 0 {
		// Not more than 64 KiB ahead of the bytes that have come: a client
		// that announces a large body and sends it slowly must not make
		// the server hold the whole size for it.
		b.Grow(int(min(n, h.opts.MaxBodyBytes, 64<<10) + 1))
	}
	_, err := b.ReadFrom(http.MaxBytesReader(w, r.Body, h.opts.MaxBodyBytes))
	if deadlineSet && err == nil {
		// The body is read; lift the deadline so that the server's wait
		// for the next request (or for the client to go away) cannot
		// cancel this one while it is being classified.
		rc.SetReadDeadline(time.Time{})
	}
	var mbe *http.MaxBytesError
	var te interface{ Timeout() bool }
	switch {
	case err == nil:
		return b.Bytes(), nil
	case errors.As(err, &mbe):
		return nil, &bodyError{http.StatusRequestEntityTooLarge, fmt.Sprintf("request body larger than %d bytes", mbe.Limit)}
	case errors.As(err, &te) && te.Timeout():
		w.Header().Set("Connection", "close")
		return nil, &bodyError{http.StatusRequestTimeout, fmt.Sprintf("the request body did not arrive within %v", h.opts.BodyTimeout)}
	}
	return nil, &bodyError{http.StatusBadRequest, "reading the request body: " + err.Error()}
}

func (h *Handler) classify(w *tracked, r *http.Request) {
	body, berr := h.readBody(w, r)
	if berr != nil {
		h.fail(w, berr.status, ErrorDetail{Message: berr.msg})
		return
	}
	ctx, cancel := context.WithTimeout(r.Context(), h.opts.Timeout)
	defer cancel()
	select {
	case h.sem <- struct{}{}:
		defer func() { <-h.sem }()
	default:
		h.fail(w, http.StatusServiceUnavailable, ErrorDetail{Message: fmt.Sprintf("overloaded: %d requests in flight; retry later", h.opts.MaxInFlight)})
		return
	}
	if testHookAcquired != nil {
		testHookAcquired()
	}

	s := h.cur.Load()
	m := s.m
	w.version = m.Info().Version
	var req Request
	dec := json.NewDecoder(bytes.NewReader(body))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&req); err != nil {
		h.fail(w, http.StatusBadRequest, ErrorDetail{Message: jsonMessage(err)})
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
		h.fail(w, http.StatusBadRequest, ErrorDetail{Message: `this model has no preprocessing: give "vectors" of features (GET /model lists them under "features")`})
		return
	}

	work := s.pool.Get().(*classify.Work)
	defer s.pool.Put(work)
	resp := Response{ModelVersion: m.Info().Version, Classes: m.Classes(), Answers: make([]Answer, n)}
	observe := h.opts.Observer != nil && h.opts.Observer.Request != nil
	if observe {
		w.margins = make([]float64, 0, n)
	}
	p := m.Pipeline()
	cells := make(map[string]string, len(m.Inputs()))
	var ignored map[string]struct{}
	var unknown []string
	for i := range n {
		if i%64 == 0 && ctx.Err() != nil {
			h.fail(w, http.StatusServiceUnavailable, ErrorDetail{Message: fmt.Sprintf("timed out after %d of %d rows", i, n)})
			return
		}
		var a classify.Answer
		var err error
		var filled []string
		if req.Vectors != nil {
			if x := req.Vectors[i]; len(x) != m.Features() {
				row := i
				h.fail(w, http.StatusBadRequest, ErrorDetail{Row: &row, Message: fmt.Sprintf(`"vectors" row %d has %d values; this model takes %d features (GET /model lists them under "features")`, i, len(x), m.Features())})
				return
			}
			a, err = m.ClassifyVector(work, req.Vectors[i])
		} else {
			clear(cells)
			unknown = unknown[:0]
			for k, raw := range req.Rows[i] {
				if _, ok := s.inputs[k]; !ok {
					unknown = append(unknown, k)
					continue
				}
				v, missing, err := cellOf(raw)
				if err != nil {
					row := i
					h.fail(w, http.StatusBadRequest, ErrorDetail{Row: &row, Field: k, Value: string(raw), Message: fmt.Sprintf("field %q: %v", k, err)})
					return
				}
				if !missing {
					cells[k] = v
				}
			}
			if len(unknown) > 0 {
				if h.opts.RefuseUnknownFields {
					slices.Sort(unknown)
					row := i
					h.fail(w, http.StatusBadRequest, ErrorDetail{Row: &row, Field: unknown[0], Message: fmt.Sprintf(`field %q is none of the model's inputs (GET /model lists them under "inputs"), and this server refuses unknown fields`, unknown[0])})
					return
				}
				if ignored == nil {
					ignored = map[string]struct{}{}
				}
				for _, k := range unknown {
					ignored[k] = struct{}{}
				}
			}
			a, err = m.ClassifyMap(work, cells)
			if err == nil && p.Impute {
				for _, in := range m.Inputs() {
					if v, ok := cells[in]; !ok || prepIsMissing(v, p) {
						filled = append(filled, in)
					}
				}
			}
		}
		if err != nil {
			h.rowFail(w, i, err)
			return
		}
		resp.Answers[i] = Answer{Class: a.Label, ClassIndex: a.Class, Scores: append([]float64(nil), a.Scores...), FilledFields: filled,
			Margin: a.Margin, Probabilities: append([]float64(nil), a.Probabilities...), NoAnswer: a.Abstained}
		for _, j := range a.Set {
			name := strconv.Itoa(j)
			if c := m.Classes(); c != nil {
				name = c[j]
			}
			resp.Answers[i].Set = append(resp.Answers[i].Set, name)
		}
		if observe {
			w.margins = append(w.margins, a.Margin)
		}
	}
	for k := range ignored {
		resp.IgnoredFields = append(resp.IgnoredFields, k)
	}
	slices.Sort(resp.IgnoredFields)
	w.rows = n
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

// modelInfo is the body of GET /model.
type modelInfo struct {
	classify.Info
	Graph    []modelNode `json:"graph"`
	Features []string    `json:"features"`
}

type modelNode struct {
	Name string `json:"name"`
	Kind string `json:"kind"`
	In   int    `json:"in"`
	Out  int    `json:"out"`
}

func (h *Handler) info(w *tracked, r *http.Request) {
	m := h.Model()
	w.version = m.Info().Version
	i := modelInfo{Info: m.Info(), Features: m.FeatureNames()}
	// The file's name only: the server's directories are none of a
	// client's business.
	i.Source = ""
	if src := m.Info().Source; src != "" {
		i.Source = filepath.Base(src)
	}
	for _, n := range m.Info().Graph {
		i.Graph = append(i.Graph, modelNode{n.Name, n.Kind, n.In, n.Out})
	}
	h.reply(w, http.StatusOK, i)
}

func (h *Handler) health(w *tracked, r *http.Request) {
	v := h.Model().Info().Version
	w.version = v
	h.reply(w, http.StatusOK, map[string]any{
		"status": "ok", "model_version": v,
		"in_flight": len(h.sem), "max_in_flight": cap(h.sem),
	})
}

// String describes the handler's limits, for a server's start-up log.
func (h *Handler) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "body ≤ %d bytes within %v, ≤ %d rows, timeout %v, ≤ %d in flight",
		h.opts.MaxBodyBytes, h.opts.BodyTimeout, h.opts.MaxRows, h.opts.Timeout, h.opts.MaxInFlight)
	if h.opts.RefuseUnknownFields {
		b.WriteString(", unknown fields refused")
	} else {
		b.WriteString(", unknown fields ignored")
	}
	if ts := h.tokens.Load(); ts != nil && len(ts.sums) > 0 {
		fmt.Fprintf(&b, ", %d bearer tokens", len(ts.sums))
	} else {
		b.WriteString(", no authentication")
	}
	return b.String()
}

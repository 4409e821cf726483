package endpoint

import (
	"log/slog"
	"net/http"
	"time"

	"github.com/rhomb/rhomb/net/classify"
)

// Observer is told of each request the handler answers and of each change
// of model, so that a server can keep metrics without this package
// depending on a metrics library. Each field may be nil. The functions
// are called synchronously, from the goroutine that served the request or
// changed the model, possibly from many goroutines at once: they must be
// quick and safe for concurrent use.
type Observer struct {
	// Request is called once a response has been written.
	Request func(RequestInfo)
	// Reload is called after every attempt to change the model: Reload,
	// whether the file loaded or not, and Swap.
	Reload func(ReloadInfo)
}

// RequestInfo describes one answered request.
type RequestInfo struct {
	Method string
	// Path is the request's URL path as sent; Route is the handler's route
	// it matched ("/classify", "/model" or "/health"), or "" when none
	// did. Route has only those values, so it suits a metric label.
	Path, Route string
	// Status is the HTTP status code of the response.
	Status int
	// Rows is the number of rows classified: the request's rows on a 200
	// from POST /classify, 0 otherwise.
	Rows int
	// Latency runs from the handler's start to the end of writing the
	// response body into the server's buffers.
	Latency time.Duration
	// ModelVersion is the version of the model that answered, or "" when
	// the request was refused before a model was chosen.
	ModelVersion string
	// Margins holds, for a 200 from POST /classify, the normalized
	// margin of each row (classify.Answer.Margin), in row order. The slice belongs
	// to the handler and is valid only during the call.
	Margins []float64
}

// ReloadInfo describes one attempt to change the model.
type ReloadInfo struct {
	// Path is the file that Reload was given, or "" for Swap.
	Path string
	// Err is why the file was refused, or nil when the model changed.
	Err error
	// OldVersion was serving before; Version and Model are serving after
	// (the old ones again when Err is not nil).
	OldVersion, Version string
	Model               *classify.Model
	// LoadTime is how long reading and validating the file took (0 for
	// Swap).
	LoadTime time.Duration
}

// tracked is the ResponseWriter the routes write to: it records what the
// request log and the Observer report.
type tracked struct {
	http.ResponseWriter
	start   time.Time
	status  int
	route   string
	rows    int
	version string
	margins []float64
}

func (t *tracked) WriteHeader(code int) {
	if t.status == 0 {
		t.status = code
	}
	t.ResponseWriter.WriteHeader(code)
}

func (t *tracked) Write(b []byte) (int, error) {
	if t.status == 0 {
		t.status = http.StatusOK
	}
	return t.ResponseWriter.Write(b)
}

// Unwrap lets http.ResponseController reach the server's ResponseWriter.
func (t *tracked) Unwrap() http.ResponseWriter { return t.ResponseWriter }

// finish writes the request's log record and tells the Observer.
func (h *Handler) finish(t *tracked, r *http.Request) {
	lat := time.Since(t.start)
	status := t.status
	if status == 0 {
		status = http.StatusOK
	}
	h.opts.RequestLog.LogAttrs(r.Context(), slog.LevelInfo, "request",
		slog.String("method", r.Method), slog.String("path", r.URL.Path), slog.Int("status", status),
		slog.Int("rows", t.rows), slog.Duration("latency", lat), slog.String("model_version", t.version),
		slog.String("remote", r.RemoteAddr))
	if o := h.opts.Observer; o != nil && o.Request != nil {
		o.Request(RequestInfo{Method: r.Method, Path: r.URL.Path, Route: t.route, Status: status, Rows: t.rows,
			Latency: lat, ModelVersion: t.version, Margins: t.margins})
	}
}

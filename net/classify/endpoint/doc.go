// Package endpoint serves a classify.Model over HTTP with net/http: a
// handler library for services, with limits that keep a busy or hostile
// client from exhausting the server. It imports only the standard library
// and package classify (with the standard-library-only packages that
// classify uses; a test in classify checks the import graph); metrics
// reach a metrics library through the Observer hook, so this package
// needs none.
//
// # Routes
//
//	POST /classify   {"rows": [{"site": "east-tank", "vib_rms_mm_s": 1.5, ...}, ...]}
//	                 or {"vectors": [[0.1, -2, ...], ...]} for a model without preprocessing
//	             →   {"model_version": "…", "classes": [...],
//	                  "answers": [{"class": "healthy", "class_index": 0, "scores": [...],
//	                               "filled_fields": ["temp_rise_c"]}, ...],
//	                  "ignored_fields": ["operator_note"]}
//	GET  /model      the model's description (classify.Info, with feature names and graph;
//	                 "source" is the file's base name, never its directory)
//	GET  /health     {"status": "ok", "model_version": "…", "in_flight": n, "max_in_flight": n}
//
// A field's value is a JSON string holding the cell as the training file
// would, a JSON number, or null for missing; the model's own pipeline
// encodes it, as in training. Scores are the network's outputs in class
// order (one score for a ±1 binary model: positive means the second
// class). When the model file holds them (docs/model-file.md, "Decision"),
// each answer also has "probabilities" (calibrated, in class order), "set"
// (the prediction set's class names) and "no_answer": true where the model
// abstains. The model version is the start of the model file's SHA-256, so
// a client can tell which model answered.
//
// A row field that is none of the model's inputs is ignored, as the
// command line ignores extra CSV columns, and the response lists every
// such field once in "ignored_fields"; Options.RefuseUnknownFields makes
// it a 400 instead. When the model's pipeline fills in missing values
// (trained with imputation), an answer's "filled_fields" names the fields
// of that row that were absent, null or a missing-value marker and so
// were filled with the training mean (numbers) or most frequent category;
// the handler works this out from the row and the pipeline's settings,
// the way the pipeline decides. A model that does not fill in values
// refuses such a row with 400.
//
// # Errors and limits
//
// Every error, 404 and 405 included, is JSON, {"error": {"message": …,
// "row": …, "field": …, "value": …}}, with messages that name JSON keys,
// fields and routes. Bad JSON and bad rows get 400 naming the row (from 0)
// and the field; more rows than Options.MaxRows get 400; a body over
// Options.MaxBodyBytes gets 413; a body that has not arrived within
// Options.BodyTimeout gets 408 and the connection is closed; an unknown
// path gets 404 and a wrong method 405 with an Allow header.
//
// The body is read before the request takes one of the Options.MaxInFlight
// places, so clients that send slowly hold none of them and cannot lock
// others out. When every place is taken, a request gets 503 with
// Retry-After at once rather than waiting in an unbounded queue; a request
// whose classification exceeds Options.Timeout gets 503. Run the handler
// in an http.Server with ReadHeaderTimeout, ReadTimeout, WriteTimeout and
// IdleTimeout set (examples/classify-server shows how they nest).
//
// # Authentication
//
// With Options.Tokens, POST /classify and GET /model require an
// "Authorization: Bearer <token>" header (RFC 6750) matching one of them;
// GET /health stays open for load balancers. Tokens are compared through
// their SHA-256 digests with crypto/subtle.ConstantTimeCompare. A refused
// request gets 401 with a WWW-Authenticate: Bearer challenge and the JSON
// error body. SetTokens rotates the tokens while serving, and Authorize
// puts the same check in front of routes a server adds (a metrics page).
// Bearer tokens travel in clear text unless the connection is TLS: serve
// with TLS, or behind a proxy that terminates it on the same host.
//
// # Logs and metrics
//
// Every request gives one log record at level Info on Options.RequestLog,
// message "request", with method, path, status, rows, latency,
// model_version and remote (the connection's address; X-Forwarded-For is
// not read). Options.Observer receives the same per request, with the
// route and each row's normalized margin (classify.Answer.Margin), and each model
// change with its result and load time. examples/classify-server turns
// these into Prometheus metrics; docs/serving.md describes them.
//
// # Swapping models
//
// Reload loads a model file and swaps it in with an atomic pointer only
// after the file has fully validated; a request runs to its end on the
// model it started with, so no request is dropped or answered by a mix of
// two models. A file that fails to load leaves the old model serving and
// is logged with the reason. See examples/classify-server for a server
// that reloads on SIGHUP and shuts down gracefully on SIGTERM.
//
// # Caution
//
// A classifier is no safety guarantee. Where a model's output drives an
// alarm, a safety interlock, a credit decision or anything else that can
// hurt someone, validate it on your own data, keep a person or an
// independent protection in the loop, and follow the local codes and
// licensed practice that govern that decision.
package endpoint

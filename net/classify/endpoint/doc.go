// Package endpoint serves a classify.Model over HTTP with net/http: a
// handler library for services, with limits that keep a busy or hostile
// client from exhausting the server. It imports only the standard library
// and package classify (which adds data/prep and internal/container, both
// standard-library only).
//
// # Routes
//
//	POST /classify   {"rows": [{"site": "east-tank", "vib_rms_mm_s": 1.5, ...}, ...]}
//	                 or {"vectors": [[0.1, -2, ...], ...]} for a model without preprocessing
//	             →   {"model_version": "…", "classes": [...],
//	                  "predictions": [{"class": "healthy", "class_index": 0, "scores": [...]}, ...]}
//	GET  /model      the model's description (classify.Info, with feature names and graph)
//	GET  /health     {"status": "ok", "model_version": "…", "in_flight": n, "max_in_flight": n}
//
// A field's value is a JSON string holding the cell as the training file
// would, a JSON number, or null for missing; the model's own pipeline
// encodes it, as in training. Scores are the network's outputs in class
// order (one score for a ±1 binary model: positive means the second
// class). The model version is the start of the model file's SHA-256, so
// a client can tell which model answered.
//
// # Errors and limits
//
// Every error is JSON, {"error": {"message": …, "row": …, "field": …,
// "value": …}}: bad JSON and bad rows get 400 naming the row (from 0) and
// the field; a body over Options.MaxBodyBytes gets 413; more rows than
// Options.MaxRows get 400. When Options.MaxInFlight requests are already
// being served, a new one gets 503 with Retry-After at once rather than
// waiting in an unbounded queue; a request that exceeds Options.Timeout
// gets 503.
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

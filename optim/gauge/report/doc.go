// Package report writes a training run as one self-contained HTML page:
// the settings, a summary of the data (rows, classes, missing values and
// what was done with them), the final figures, the confusion matrices,
// the margin bound beside the measured test error, the figures of package
// plot and the cautions that go with all of these. When the Run carries
// the saved model's calibration (Run.Calibration), the page also has a
// calibration section: the reliability diagram (plot.Reliability) and
// the expected calibration error.
//
// # Use
//
// Record the run with a gauge.Recorder, collect what the recorder does not
// know into a Run, and call Write or WriteFile:
//
//	rec, _ := gauge.NewRecorder(gauge.RecorderOptions[float32]{Model: model, Train: train, Test: val,
//		Collapse: true, Spectra: true, Bound: &gauge.BoundOptions{Gamma: 0.1}})
//	start, _ := rec.Measure()                    // the "before training" figures
//	track := report.TrackLoss(model, lf, val)    // held-out loss per epoch
//	settings.Hooks = optim.Join(rec.Hooks(), track.Hooks(), myHooks)
//	res, _ := trainer.Run(ctx)
//	bound, _ := gauge.BoundOf(model, train, test, gauge.BoundOptions{Gamma: 0.1})
//	report.WriteFile("run.html", &report.Run{History: rec.History(), Start: &start,
//		Heldout: "validation", HeldoutLoss: track.Loss, Bound: bound,
//		Confusion: []report.Confusion{report.ConfusionOf(model, "test", test)}, ...})
//
// rhomb train -report FILE (and rhomb demo -report) does all of this for a
// run of the training procedure.
//
// # The page
//
// The page needs nothing but itself: figures are PNG data: URIs, the
// style sheet and a ten-line script are inline, and it names no address,
// so it opens the same offline, from a mail attachment or an archive in
// ten years. It is also well-formed XML (XHTML syntax: void elements
// closed, only XML's own entities), so a tool without an HTML parser can
// read its numbers: every value of the summary and the bound has an id
// (g-…, b-…, and c-… in the calibration section), and the per-epoch
// table has one row per epoch.
//
// Numbers show four significant digits, error rates and accuracies a
// percentage with two decimals; a dash means "not measured".
//
// The script checks, once the page has loaded, that every figure decoded
// and has a non-zero size and that no script or resource error occurred,
// and writes what it found into the body's data-check attribute
// ("figures=7 bad=0 errors=0"). The package's browser test reads it from
// headless chromium (bash .ci/report-check).
//
// # Cautions
//
// Every report carries DefaultCautions, after any Run.Notes about the
// data: a classifier is no safety guarantee; the diagnostics describe the
// model on the data it was given; the margin bound is loose and holds only
// under its conditions; and held-out figures are estimates from a finite
// sample.
package report

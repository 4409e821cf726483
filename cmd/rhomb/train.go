package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/atomicfile"
	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/recipe"
)

const trainSummary = `Train a bias-free ReLU classifier with weight normalization and weight
decay, then save it with its preprocessing. Rows are split (stratified,
seeded) into training, validation and test sets; the preprocessing is
fitted on the training rows only: numeric columns standardized (the
spread never below a twentieth of the column's range), categorical ones
one-hot, missing cells imputed (-missing fail refuses them). Images
(-images) become one column per pixel, byte/255, and are standardized the
same way.

The step size is measured: the largest curvature of the loss on 512
training rows gives the stability threshold 2(1+μ)/λ_max, and η is
-step-factor times it, re-measured as training goes; the rate warms up,
then follows a cosine. Every epoch is scored on the validation rows; the
best epoch (ties: the larger minimum normalized margin) is the one saved,
and the run stops after -patience epochs without a better score. A model
that answers one class only, is no better than the most frequent class,
or never recognizes a class is reported (-strict: an error).

The defaults are the library's (optim/recipe Defaults), chosen on an open
benchmark suite of eleven datasets against a tuned logistic regression
(README, "How the defaults were chosen"). A classifier is no safety
guarantee: validate it on your own data before its answers drive anything
that can hurt someone.`

const trainExample = `  rhomb train -data readings.csv -label condition -missing impute \
      -hidden 32,32 -epochs 60 -decay 1e-3 -o pumps.model -save-every 10
  rhomb train -resume pumps.model.checkpoint -o pumps.model     # after an interrupt
  rhomb train -resume pumps.model.checkpoint -o pumps.model -lr 0.002   # after divergence, a smaller step
  gunzip -c readings.csv.gz | rhomb train -data - -label condition -o pumps.model`

// runOptions are the train flags that are not part of the run's settings:
// they may differ when a run resumes.
type runOptions struct {
	out, checkpoint, resume, metrics string
	every                            int
	quiet                            bool
	// report is the -report file; title, source and notes head it
	// (defaults: from the data file's name; no notes).
	report, title, source string
	notes                 []string
	// newLR, when positive, is the step size a resumed run goes on with
	// (-lr given with -resume); rescale, when positive, multiplies it
	// (-step-factor given with -resume: new factor / old).
	newLR, rescale float64
	// args is the command line, for the run record.
	args []string
}

// stdinName names standard input in messages, for -data -.
const stdinName = "standard input"

func runTrain(e *env, args []string) error {
	c := defaultConfig()
	fs := newFlags(e, "train", trainSummary, trainExample)
	c.bind(fs)
	var o runOptions
	fs.StringVar(&o.out, "o", "", "model `file` to write (required)")
	fs.IntVar(&o.every, "save-every", 0, "write a checkpoint every `N` epochs (one is always written on interrupt)")
	fs.StringVar(&o.checkpoint, "checkpoint", "", "checkpoint `file` (default: the model file with .checkpoint appended)")
	fs.StringVar(&o.resume, "resume", "", "continue the run saved in this checkpoint `file`, with its settings (-epochs, and -lr or -step-factor for a smaller step, may be given again)")
	fs.StringVar(&o.metrics, "metrics", "", "write every epoch's figures (loss, training and validation accuracy, ρ, ρ*, minimum margin) as JSON Lines to this `file`; a resumed run appends")
	fs.StringVar(&o.report, "report", "", "write a self-contained HTML run report (figures, margins, ρ and ρ*, collapse, bound, cautions) to this `file`")
	fs.BoolVar(&o.quiet, "quiet", false, "print only the final summary")
	if err := parse(fs, args); err != nil {
		return err
	}
	o.args = args
	if o.out == "" {
		return usageError{errors.New("train: -o names the model file to write")}
	}
	if o.checkpoint == "" {
		o.checkpoint = o.out + ".checkpoint"
	}
	if o.every < 0 {
		return usageError{fmt.Errorf("train: -save-every %d: want 0 (never) or a number of epochs", o.every)}
	}
	if o.resume != "" {
		if err := resumeConfig(fs, &c, &o); err != nil {
			return err
		}
	}
	if err := c.check(); err != nil {
		return err
	}
	if c.Float == 32 {
		return train[float32](e, &c, &o)
	}
	return train[float64](e, &c, &o)
}

// resumeConfig replaces c with the settings of the run in the checkpoint
// -resume names. Only the run options, -epochs, and -lr or -step-factor
// (to go on with a smaller step, after divergence) may be given again;
// a change of step size is recorded in the settings.
func resumeConfig(fs *flag.FlagSet, c *config, o *runOptions) error {
	epochs, lr, factor := 0, c.LR, c.StepFactor
	var lrGiven, factorGiven bool
	var conflict string
	fs.Visit(func(f *flag.Flag) {
		switch f.Name {
		case "o", "save-every", "checkpoint", "resume", "metrics", "report", "quiet":
		case "epochs":
			epochs = c.Epochs
		case "lr":
			lrGiven = true
		case "step-factor":
			factorGiven = true
		default:
			conflict = f.Name
		}
	})
	switch {
	case conflict != "":
		return usageError{fmt.Errorf("train: -%s cannot change when resuming: the run's settings come from %s (only -epochs, and -lr or -step-factor, may be given again)", conflict, o.resume)}
	case lrGiven && factorGiven:
		return usageError{errors.New("train: give -lr or -step-factor with -resume, not both: -lr sets the step size itself, -step-factor a fraction of the measured stability threshold")}
	case lrGiven && !(lr > 0 && !math.IsInf(lr, 0)):
		return usageError{fmt.Errorf("train: -lr %v with -resume: give the positive step size to go on with", lr)}
	}
	m, err := modelfile.Load[float64](o.resume)
	if err != nil {
		return modelError{err}
	}
	if m.Checkpoint == nil {
		return modelError{fmt.Errorf("%s is a model, not a checkpoint: there is no run to resume", o.resume)}
	}
	*c = defaultConfig()
	if err := json.Unmarshal(m.Training, c); err != nil {
		return modelError{fmt.Errorf("%s: training record: %w", o.resume, err)}
	}
	if epochs > 0 {
		c.Epochs = epochs
	}
	if !lrGiven && !factorGiven {
		return nil
	}
	change := stepChange{Epoch: m.Checkpoint.Epoch}
	if lrGiven {
		c.LR, change.LR, o.newLR = lr, lr, lr
	} else {
		if c.LR > 0 {
			return usageError{fmt.Errorf("train: -step-factor scales a measured step size, and the run in %s has the fixed step size -lr %v: give -lr to change it", o.resume, c.LR)}
		}
		if !(factor > 0 && factor <= 1) {
			return usageError{fmt.Errorf("train: -step-factor %v: want a fraction in (0, 1]", factor)}
		}
		o.rescale = factor / c.StepFactor
		c.StepFactor, change.StepFactor = factor, factor
	}
	c.StepChanges = append(c.StepChanges, change)
	return nil
}

// writable checks, before a run, that path can be written: that it is no
// directory, and that its directory exists and takes new files (a
// temporary file is created and removed there, as the save will do).
func writable(cmd, flagName, path string) error {
	if fi, err := os.Stat(path); err == nil && fi.IsDir() {
		return usageError{fmt.Errorf("%s: %s %s is a directory; give a file name (in it, if that is where the file should go)", cmd, flagName, path)}
	}
	f, err := atomicfile.Create(path)
	if err != nil {
		dir := filepath.Dir(path)
		why := "cannot be written there"
		switch {
		case errors.Is(err, fs.ErrNotExist):
			why = fmt.Sprintf("the directory %s does not exist", dir)
		case errors.Is(err, fs.ErrPermission):
			why = fmt.Sprintf("the directory %s does not let you create files", dir)
		default:
			var pe *fs.PathError
			if errors.As(err, &pe) {
				why = fmt.Sprintf("a file cannot be created in %s: %v", dir, pe.Err)
			}
		}
		return usageError{fmt.Errorf("%s: %s %s: %s; give a path in a directory you can write to", cmd, flagName, path, why)}
	}
	f.Abort()
	return nil
}

// writeErr says that writing path failed, in words: the file system's
// reason without the library's prefixes.
func writeErr(what, path string, err error) error {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		err = pe.Err
	}
	return fmt.Errorf("writing the %s %s failed: %v", what, path, err)
}

// divergence reports whether err says the run diverged, and how, in the
// command line's words.
func divergence(err error) (bool, string) {
	var nf *optim.NonFiniteError
	var dv *recipe.DivergenceError
	switch {
	case errors.As(err, &nf):
		where := ""
		if nf.Index >= 0 {
			where = fmt.Sprintf(" (at index %d)", nf.Index)
		}
		return true, fmt.Sprintf("step %d, in epoch %d, made the %s %v%s", nf.Step, nf.Epoch+1, nf.What, nf.Value, where)
	case errors.As(err, &dv):
		return true, libPrefixes.Replace(dv.What)
	}
	return false, ""
}

// libPrefixes takes the library's package prefixes out of a message it
// wrote, which the command line passes on.
var libPrefixes = strings.NewReplacer("recipe: ", "", "optim: ", "", "onnx: ", "")

// resumeHint is the command that resumes from a checkpoint, with the
// step-size flag to add, if any.
func resumeHint(c *config, o *runOptions, ckpt, step string) string {
	s := fmt.Sprintf("rhomb train -resume %s -o %s", ckpt, o.out)
	if step != "" {
		s += " " + step
	}
	if c.Data == "-" {
		s += " < DATA.csv   (the same data, on standard input)"
	}
	return s
}

// smallerStep is the flag that resumes a diverged run with a smaller step
// size: a tenth of the last η tried for a fixed rate; for a measured one,
// a quarter of the step factor, so that re-measuring cannot raise η back.
func smallerStep(c *config, rate float64) string {
	if !(rate > 0) {
		rate = c.LR
	}
	if c.LR > 0 || !(rate > 0) {
		return fmt.Sprintf("-lr %.3g", rate/10)
	}
	return fmt.Sprintf("-step-factor %.3g", c.StepFactor/4)
}

// startRun checks the run's output paths, reads and prepares the data,
// and records the run (data by content, command lines, build); a resumed
// run must read the same data.
func startRun[T net.Float](e *env, c *config, o *runOptions) (*prepared[T], error) {
	// Every file the run writes is checked before it starts, so that a
	// wrong path fails now and not after the whole run.
	outputs := [][2]string{{"-o", o.out}, {"-checkpoint", o.checkpoint}, {"-metrics", o.metrics}, {"-report", o.report}}
	for _, f := range outputs {
		if f[1] != "" {
			if err := writable("train", f[0], f[1]); err != nil {
				return nil, err
			}
		}
	}
	if c.Search > 0 {
		if err := searchable(c, o); err != nil {
			return nil, err
		}
	}
	p, err := prepare[T](c, e.stdin)
	if err != nil {
		return nil, err
	}
	// The run record: the data by content (a resumed run must read the
	// same), every command line that trained the model, and the build.
	rec := newRunRecord(o.args)
	if o.resume != "" && c.Run != nil {
		if err := sameData(o.resume, c.Run.Data, p.sources); err != nil {
			return nil, err
		}
		rec.Commands = append(c.Run.Commands, rec.Commands...)
	}
	rec.Data = p.sources
	c.Run = rec
	if m, _ := recipe.ParseMetric(c.Metric); m == recipe.AUC && p.train.Outputs != 1 {
		return nil, usageError{fmt.Errorf("train: -metric auc ranks the scores of a two-class model, and the data has %d classes: use -metric balanced or -metric macro-f1", len(p.classes))}
	}
	return p, nil
}

// networkFor builds the network the settings describe (and its
// normalization), or loads the one of the checkpoint being resumed.
func networkFor[T net.Float](c *config, o *runOptions, p *prepared[T]) (n *net.Network[T], wrapped *normalize.Net[T], resumed *modelfile.Model[T], err error) {
	if o.resume != "" {
		if resumed, err = modelfile.Load[T](o.resume); err != nil {
			return nil, nil, nil, modelError{err}
		}
		n, wrapped = resumed.Network, resumed.Normalized
		if n.In() != p.train.Features || n.Out() != p.train.Outputs {
			return nil, nil, nil, modelError{fmt.Errorf("%s: the network takes %d features and gives %d outputs, the data has %d and %d", o.resume, n.In(), n.Out(), p.train.Features, p.train.Outputs)}
		}
		return n, wrapped, resumed, nil
	}
	if n, err = buildNetwork[T](c, p.train.Features, p.train.Outputs); err != nil {
		return nil, nil, nil, err
	}
	no, err := c.normOptions()
	if err != nil {
		return nil, nil, nil, err
	}
	if no != nil {
		if wrapped, err = normalize.Wrap(n, *no); err != nil {
			return nil, nil, nil, usageError{fmt.Errorf("train: %w", err)}
		}
	}
	return n, wrapped, nil, nil
}

// restoreSession puts a resumed run's state back into sess: the
// procedure's record and the trainer's, with a new step size when -lr or
// -step-factor was given again.
func restoreSession[T net.Float](sess *recipe.Session[T], resumed *modelfile.Model[T], c *config, o *runOptions) error {
	var err error
	if resumed.Session == nil {
		// A checkpoint written before train kept its best epoch: the
		// trainer's state is all there is, and the run goes on from it.
		err = sess.Trainer().Restore(*resumed.Checkpoint)
	} else {
		var ss recipe.SessionState
		if err := json.Unmarshal(resumed.Session, &ss); err != nil {
			return modelError{fmt.Errorf("%s: session record: %w", o.resume, err)}
		}
		ss.Kept = resumed.Kept
		if o.newLR > 0 || o.rescale > 0 {
			// A new step size: the rate, and the cap a rollback set,
			// follow it, and the run may again lower it on its own.
			c.StepChanges[len(c.StepChanges)-1].Was = ss.Rate
			if o.newLR > 0 {
				ss.Rate, ss.Cap = o.newLR, 0
			} else {
				ss.Rate, ss.Cap = ss.Rate*o.rescale, ss.Cap*o.rescale
			}
			ss.Rollbacks = 0
		}
		err = sess.Restore(ss, *resumed.Checkpoint)
	}
	if err != nil {
		return modelError{fmt.Errorf("%s: %w", o.resume, err)}
	}
	return nil
}

// runEnd is what a finished run reports and saves.
type runEnd[T net.Float] struct {
	w            io.Writer
	c            *config
	o            *runOptions
	p            *prepared[T]
	model        optim.Model[T]
	n            *net.Network[T]
	res          optim.Result
	out          recipe.Outcome
	saved        *modelfile.Model[T] // the model as it is saved, its decision fitted here
	rr           *runReport[T]
	divergedNote string
}

// finish fits how the saved model answers, measures it on every split,
// checks it for degenerate answers, saves it and prints the summary (and
// writes the report, when asked).
func (r *runEnd[T]) finish() error {
	metrics := map[string]any{"epochs": r.res.Epochs, "steps": r.res.Steps, "status": r.res.Status.String(), "rho": r.n.Rho(),
		"best_epoch": r.out.Best.Epoch, "ranked_by": r.out.Metric.String(), "stopped": r.out.Stop.String(), "learning_rate": r.out.Rate}
	if !math.IsNaN(r.res.Loss) {
		metrics["loss"] = r.res.Loss
	}
	if !math.IsNaN(r.out.Sharpness) {
		metrics["sharpness"] = r.out.Sharpness
	}
	decision, err := fitDecision(r.c, r.saved, r.p.val)
	if err != nil {
		return err
	}
	report := func(name string, set *data.Set[T]) *score.Confusion {
		if set == nil {
			return nil
		}
		conf := decidedConfusion(r.model, r.saved, set, r.p.classes)
		metrics[name+"_accuracy"] = conf.Accuracy()
		metrics[name+"_rows"] = set.Rows
		return conf
	}
	report("train", r.p.train)
	servedMargins(r.saved, r.p.train, metrics)
	val := report("validation", r.p.val)
	test := report("test", r.p.test)
	var health recipe.Health
	if r.p.val != nil {
		health = recipe.Check(r.model, r.p.val, r.p.classes)
		if !health.OK() {
			metrics["health"] = strings.Join(health.Problems, "; ")
		}
	}
	if r.c.Strict && !health.OK() {
		return fmt.Errorf("the trained model is degenerate, so nothing was saved (-strict): %s", cliHealth(health))
	}
	fmt.Fprintf(r.w, "trained %d epochs (%d steps, %s)", r.res.Epochs, r.res.Steps, r.out.Stop)
	if r.o.out != "" {
		m := r.saved
		m.Metrics = metrics
		if err := modelfile.Save(r.o.out, m); err != nil {
			return writeErr("model", r.o.out, err)
		}
		fmt.Fprintf(r.w, "; saved %s", r.o.out)
	}
	fmt.Fprintln(r.w)
	fmt.Fprint(r.w, r.divergedNote)
	if r.p.val != nil {
		fmt.Fprintf(r.w, "kept epoch %d of %d: best validation %s %.4f (ties go to the larger minimum margin)\n", r.out.Best.Epoch, r.res.Epochs, r.out.Metric, r.out.Best.Value)
	}
	writeLines(r.w, decision)
	fmt.Fprintf(r.w, "classes: %s\n", joinClasses(r.p.classes))
	if r.p.table != nil && r.p.table.Dropped > 0 {
		fmt.Fprintf(r.w, "rows dropped for missing values: %d\n", r.p.table.Dropped)
	}
	fmt.Fprintf(r.w, "train accuracy %.4f on %d rows; ρ = %.4g\n", metrics["train_accuracy"], r.p.train.Rows, r.n.Rho())
	if !health.OK() {
		fmt.Fprintf(r.w, "\nwarning: the kept model looks degenerate: %s\n", cliHealth(health))
	}
	for _, s := range []struct {
		name string
		conf *score.Confusion
	}{{"validation", val}, {"test", test}} {
		if s.conf != nil {
			fmt.Fprintf(r.w, "\n%s rows:\n", s.name)
			s.conf.Write(r.w)
		}
	}
	if r.rr != nil {
		title := r.o.title
		if title == "" {
			title = reportTitle(r.c)
			if r.c.Data == "-" {
				title = "rhomb run report: " + stdinName
			}
		}
		if err := r.rr.write(r.o.report, title, r.o.source, r.o.notes, r.c, r.p, r.model, r.n, r.res, val, test, r.saved); err != nil {
			return fmt.Errorf("report: %w", err)
		}
		fmt.Fprintf(r.w, "\nreport written to %s\n", r.o.report)
	}
	return nil
}

func train[T net.Float](e *env, c *config, o *runOptions) error {
	p, err := startRun[T](e, c, o)
	if err != nil {
		return err
	}
	if c.Search > 0 {
		return trainSearch(e, c, o, p)
	}
	n, wrapped, resumed, err := networkFor(c, o, p)
	if err != nil {
		return err
	}
	var model optim.Model[T] = n
	if wrapped != nil {
		model = wrapped
	}
	var weights []float64
	if c.Balance {
		weights = data.ClassWeights(p.train.Labels(), max(p.train.Outputs, 2))
	}
	lf, err := makeLoss[T](c, p.train.Outputs, weights)
	if err != nil {
		return err
	}
	plan, err := c.plan()
	if err != nil {
		return err
	}
	w := e.stdout
	if !o.quiet {
		warnImbalance(w, p)
		warnUnseen(w, p)
	}

	var sess *recipe.Session[T]
	bundle := func(st *optim.State) *modelfile.Model[T] {
		m := &modelfile.Model[T]{Network: n, Normalized: wrapped, Pipeline: p.pipeline, Classes: p.classes,
			Label: c.Label, Loss: lf.Name(), Training: c.record(), Checkpoint: st}
		if st != nil {
			ss := sess.State()
			m.Session, _ = json.Marshal(ss) // SessionState's MarshalJSON cannot fail
			m.Kept = ss.Kept
		}
		return m
	}
	// last is the run at its last epoch boundary, or its start: the
	// weights and trainer state a diverged run is saved from.
	var last struct {
		params, running [][]T
		state           optim.State
	}
	snapshot := func() {
		ps := model.Params()
		if last.params == nil {
			for _, p := range ps {
				last.params = append(last.params, make([]T, len(p.Value)))
			}
		}
		for i, p := range ps {
			copy(last.params[i], p.Value)
		}
		// Batch normalization's running statistics belong with the
		// weights they were gathered for.
		rs := model.Base().Running()
		if last.running == nil {
			for _, r := range rs {
				last.running = append(last.running, make([]T, len(r.Value)))
			}
		}
		for i, r := range rs {
			copy(last.running[i], r.Value)
		}
		last.state = sess.Trainer().State()
	}
	// -metrics: one line per epoch with what the console shows; a resumed
	// run appends to the file, so the epochs before the stop stay in it.
	var metricsOut *json.Encoder
	if o.metrics != "" {
		flags := os.O_WRONLY | os.O_CREATE | os.O_TRUNC
		if o.resume != "" {
			flags = os.O_WRONLY | os.O_CREATE | os.O_APPEND
		}
		f, err := os.OpenFile(o.metrics, flags, 0o644)
		if err != nil {
			return writeErr("metrics", o.metrics, err)
		}
		defer f.Close()
		metricsOut = json.NewEncoder(f)
	}
	var rep reporter
	var track stepTracker
	hooks := &optim.Hooks{
		EpochMargins: true,
		Step: func(i *optim.StepInfo) error {
			track.observe(i)
			rep.step()
			return nil
		},
	}
	obs := &recipe.Observer{
		Hooks: hooks,
		Note: func(s string) {
			if !o.quiet {
				rep.note(s)
			}
		},
		Epoch: func(r *recipe.EpochReport) error {
			snapshot()
			ei := r.Info
			line := epochLine{epoch: ei.Epoch + 1, epochs: sess.Plan().Epochs, loss: ei.Loss,
				trainAcc: 1 - float64(ei.Full.Negative)/float64(ei.Full.Rows), valAcc: valAccuracy(p.val, r),
				rho: ei.Rho, rhoStar: track.rhoStar, minMargin: ei.Full.Min, elapsed: ei.Elapsed, best: r.Best}
			rep.epoch(line)
			if metricsOut != nil {
				if err := metricsOut.Encode(newMetricsRecord(line, o.resume != "")); err != nil {
					return writeErr("metrics", o.metrics, err)
				}
			}
			if o.every > 0 && (ei.Epoch+1)%o.every == 0 {
				st := sess.Trainer().State()
				if err := modelfile.Save(o.checkpoint, bundle(&st)); err != nil {
					return writeErr("checkpoint", o.checkpoint, err)
				}
			}
			return nil
		},
	}
	resolved := plan.Resolved(p.train.Rows)
	batch := min(resolved.Batch, p.train.Rows)
	steps := (p.train.Rows + batch - 1) / batch * resolved.Epochs
	var rr *runReport[T]
	if o.report != "" {
		if rr, err = newRunReport(c, p, model, lf, o.resume != "", steps, resolved.Epochs); err != nil {
			return fmt.Errorf("report: %w", err)
		}
		obs.Hooks = optim.Join(hooks, rr.hooks())
	}
	rep = newReporter(e, o.quiet, steps)
	sess, err = recipe.NewSession(model, lf, p.train, p.val, plan, obs)
	if err != nil {
		return usageError{fmt.Errorf("train: %w", err)}
	}
	if resumed != nil {
		if err := restoreSession(sess, resumed, c, o); err != nil {
			return err
		}
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	snapshot()
	out, err := sess.Run(ctx)
	rep.finish()
	res := out.Result
	if out.Stop == recipe.StopCanceled && o.checkpoint == "" {
		return fmt.Errorf("%w after %d steps", errInterrupted, res.Steps)
	}
	if out.Stop == recipe.StopCanceled {
		st := sess.Trainer().State()
		if serr := modelfile.Save(o.checkpoint, bundle(&st)); serr != nil {
			return fmt.Errorf("%w; %v", errInterrupted, writeErr("checkpoint", o.checkpoint, serr))
		}
		return fmt.Errorf("%w after %d steps; checkpoint saved: resume with %s", errInterrupted, res.Steps, resumeHint(c, o, o.checkpoint, ""))
	}
	diverged, how := divergence(err)
	// A diverged run keeps its last finite weights in a checkpoint, -save-every
	// or not: from them it can go on with a smaller step size.
	var divergedAt string
	if diverged || out.Stop == recipe.StopDiverged {
		if last.state.Epoch == 0 {
			divergedAt = "the start of the run"
		} else {
			divergedAt = fmt.Sprintf("the end of epoch %d", last.state.Epoch)
		}
	}
	saveLast := func() error {
		if o.checkpoint == "" {
			return errors.New("no checkpoint file (give -o)")
		}
		ps := model.Params()
		kept := make([][]T, len(ps))
		for i, p := range ps {
			kept[i] = append([]T(nil), p.Value...)
		}
		rs := model.Base().Running()
		keptRunning := make([][]T, len(rs))
		for i, r := range rs {
			keptRunning[i] = append([]T(nil), r.Value...)
			copy(r.Value, last.running[i])
		}
		optim.SetParams(model, last.params)
		st := last.state
		serr := modelfile.Save(o.checkpoint, bundle(&st))
		optim.SetParams(model, kept)
		for i, r := range rs {
			copy(r.Value, keptRunning[i])
		}
		return serr
	}
	if diverged {
		rate := sess.State().Rate
		msg := fmt.Sprintf("training diverged: %s, and kept diverging after the step size was lowered %d times, to η = %.4g; no epoch finished, so there is no model to save", how, out.Lowered, rate)
		if serr := saveLast(); serr != nil {
			return fmt.Errorf("%s; the weights from %s were not saved either: %v", msg, divergedAt, serr)
		}
		return fmt.Errorf("%s.\nThe weights from %s, before the failing step, are saved in the checkpoint %s; to go on with a smaller step size:\n  %s",
			msg, divergedAt, o.checkpoint, resumeHint(c, o, o.checkpoint, smallerStep(c, rate)))
	}
	if err != nil {
		return fmt.Errorf("training failed: %s", libPrefixes.Replace(err.Error()))
	}
	var divergedNote string
	if out.Stop == recipe.StopDiverged {
		if serr := saveLast(); serr != nil {
			divergedNote = fmt.Sprintf("note: the run diverged and ends with its best epoch; its last finite weights (from %s) could not be saved: %v\n", divergedAt, serr)
		} else {
			divergedNote = fmt.Sprintf("note: the run diverged and ends with its best epoch; its last finite weights (from %s) are saved in the checkpoint %s; to go on from there with a smaller step size:\n  %s\n",
				divergedAt, o.checkpoint, resumeHint(c, o, o.checkpoint, smallerStep(c, sess.State().Rate)))
		}
	}

	end := &runEnd[T]{w: w, c: c, o: o, p: p, model: model, n: n, res: res, out: out, saved: bundle(nil), rr: rr, divergedNote: divergedNote}
	return end.finish()
}

// searchable reports the flags a search cannot honour: it builds its
// candidates with the training procedure's own network (ReLU, He-normal,
// a constant feature, the square loss) and runs them in one process.
func searchable(c *config, o *runOptions) error {
	var bad string
	switch {
	case o.resume != "":
		bad = "-resume"
	case o.every > 0:
		bad = "-save-every"
	case o.report != "":
		bad = "-report"
	case o.metrics != "":
		bad = "-metrics"
	case c.Activation != "relu":
		bad = "-act"
	case c.Init != "he":
		bad = "-init"
	case c.NoConstant:
		bad = "-no-constant"
	case c.Loss != "square":
		bad = "-loss"
	case c.Plain:
		bad = "-plain-readout"
	case c.Hold != "multiplier":
		bad = "-hold"
	}
	if bad != "" {
		return usageError{fmt.Errorf("train: -search trains the procedure's own networks and cannot be combined with %s", bad)}
	}
	return nil
}

// trainSearch races the candidates of -search and saves the winner.
func trainSearch[T net.Float](e *env, c *config, o *runOptions, p *prepared[T]) error {
	if p.val == nil {
		return usageError{errors.New("train: -search ranks candidates on validation rows; set -holdout above 0")}
	}
	plan, err := c.plan()
	if err != nil {
		return err
	}
	w := e.stdout
	if !o.quiet {
		warnImbalance(w, p)
		warnUnseen(w, p)
	}
	obs := &recipe.Observer{Note: func(s string) {
		if !o.quiet {
			fmt.Fprintf(e.stderr, "note: %s\n", s)
		}
	}}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	f, entries, err := recipe.Search(ctx, p.train, p.val, recipe.Candidates(plan, c.Search), c.Balance, obs)
	if ctx.Err() != nil {
		return fmt.Errorf("%w during the search; nothing was saved", errInterrupted)
	}
	if err != nil {
		return fmt.Errorf("search failed: %w", err)
	}
	fmt.Fprintf(w, "search: %d candidates by successive halving, ranked by validation %s\n", len(entries), f.Plan.Metric)
	fmt.Fprintf(w, "%-3s %-11s %-8s %-8s %-10s %7s %9s %11s\n", "#", "step factor", "ρ0", "λ", "hidden", "epochs", "best", "min margin")
	for i, en := range entries {
		fmt.Fprintf(w, "%-3d %-11.3g %-8.3g %-8.3g %-10s %7d %9.4f %+11.4f\n", i+1, en.Plan.StepFactor, en.Plan.Rho0, en.Plan.Decay,
			strings.Trim(strings.ReplaceAll(fmt.Sprint(en.Plan.Hidden), " ", ","), "[]"), en.Epochs, en.Best.Value, en.Best.MinMargin)
	}
	// The record says what was trained: the winner's settings.
	won := *c
	won.Hidden, won.Rho0, won.Decay, won.StepFactor = f.Plan.Hidden, f.Plan.Rho0, f.Plan.Decay, f.Plan.StepFactor
	model := f.Model()
	metrics := map[string]any{"epochs": f.Outcome.Result.Epochs, "steps": f.Outcome.Result.Steps, "best_epoch": f.Outcome.Best.Epoch,
		"ranked_by": f.Outcome.Metric.String(), "stopped": f.Outcome.Stop.String(), "learning_rate": f.Outcome.Rate,
		"search_candidates": len(entries), "rho": f.Network.Rho()}
	m := &modelfile.Model[T]{Network: f.Network, Normalized: f.Normalized, Pipeline: p.pipeline, Classes: p.classes,
		Label: c.Label, Loss: f.Loss.Name(), Training: won.record(), Metrics: metrics}
	decision, err := fitDecision(c, m, p.val)
	if err != nil {
		return err
	}
	val := decidedConfusion(model, m, p.val, p.classes)
	metrics["validation_accuracy"], metrics["validation_rows"] = val.Accuracy(), p.val.Rows
	servedMargins(m, p.train, metrics)
	var test *score.Confusion
	if p.test != nil {
		test = decidedConfusion(model, m, p.test, p.classes)
		metrics["test_accuracy"], metrics["test_rows"] = test.Accuracy(), p.test.Rows
	}
	health := recipe.Check(model, p.val, p.classes)
	if !health.OK() {
		metrics["health"] = strings.Join(health.Problems, "; ")
		if c.Strict {
			return fmt.Errorf("the trained model is degenerate, so nothing was saved (-strict): %s", cliHealth(health))
		}
	}
	if err := modelfile.Save(o.out, m); err != nil {
		return writeErr("model", o.out, err)
	}
	fmt.Fprintf(w, "kept candidate with step factor %.3g, ρ0 %.3g, λ %.3g, hidden %v: epoch %d of %d; saved %s\n",
		f.Plan.StepFactor, f.Plan.Rho0, f.Plan.Decay, f.Plan.Hidden, f.Outcome.Best.Epoch, f.Outcome.Result.Epochs, o.out)
	writeLines(w, decision)
	if !health.OK() {
		fmt.Fprintf(w, "\nwarning: the kept model looks degenerate: %s\n", cliHealth(health))
	}
	fmt.Fprintf(w, "\nvalidation rows:\n")
	val.Write(w)
	if test != nil {
		fmt.Fprintf(w, "\ntest rows:\n")
		test.Write(w)
	}
	return nil
}

// cliHealth says what is wrong with a model, with what to try in flags.
func cliHealth(h recipe.Health) string {
	return strings.Join(h.Problems, "; ") + ". Try -balance (weight the classes), -metric balanced (rank epochs by balanced accuracy), -search 4, or more -epochs; -strict makes this an error"
}

// valAccuracy is the epoch's validation accuracy, NaN without validation
// rows.
func valAccuracy[T net.Float](val *data.Set[T], r *recipe.EpochReport) float64 {
	if val == nil {
		return math.NaN()
	}
	return r.Score.Accuracy
}

// warnUnseen says when held-out rows hold a category no training row has.
func warnUnseen[T net.Float](w io.Writer, p *prepared[T]) {
	for _, u := range p.unseen {
		fmt.Fprintf(w, "note: held-out rows hold a category the training rows do not (%s); they are scored with it encoded as all zeros, as serving does with -unknown-zero\n", u)
	}
}

// rareRatio says when a class is rare: it holds fewer than a quarter as
// many training rows as the largest class. A model can then score well by
// hardly ever answering it (common practice, no source).
const rareRatio = 0.25

// warnImbalance says when a class is rare in the training rows, and what
// helps.
func warnImbalance[T net.Float](w io.Writer, p *prepared[T]) {
	counts := make([]int, max(p.train.Outputs, 2))
	for _, l := range p.train.Labels() {
		counts[l]++
	}
	most := 0
	for _, n := range counts {
		most = max(most, n)
	}
	for k, n := range counts {
		if float64(n) < rareRatio*float64(most) && k < len(p.classes) {
			fmt.Fprintf(w, "note: class %q holds %.1f%% of the training rows (%d; the largest class %d); -balance weights the classes and -metric balanced ranks epochs by balanced accuracy\n",
				p.classes[k], 100*float64(n)/float64(p.train.Rows), n, most)
		}
	}
}

func confusion[T net.Float](m optim.Model[T], s *data.Set[T], classes []string) *score.Confusion {
	c := score.New(classes)
	recipe.Predict(m, s, func(r int, out []T) { c.Add(s.Class(r), data.ClassOf(out)) })
	return c
}

// accuracy is NaN for a nil set.
func accuracy[T net.Float](m optim.Model[T], s *data.Set[T]) float64 {
	if s == nil {
		return math.NaN()
	}
	return recipe.Evaluate(m, s).Accuracy()
}

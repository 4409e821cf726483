package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/recipe"
)

// config is everything a training run depends on. It is stored in the
// model file (as its training record) and in checkpoints, from which a run
// resumes with exactly these settings.
type config struct {
	// Data.
	Data     string            `json:"data,omitempty"`   // CSV file
	Images   string            `json:"images,omitempty"` // IDX images
	Labels   string            `json:"labels,omitempty"` // IDX labels
	Label    string            `json:"label,omitempty"`
	Kinds    map[string]string `json:"kinds,omitempty"`
	Skip     []string          `json:"skip,omitempty"`
	Missing  string            `json:"missing"`
	Markers  []string          `json:"markers,omitempty"`
	UnitNorm bool              `json:"unit_norm,omitempty"`
	NewAsNil bool              `json:"unknown_as_zeros,omitempty"`
	KeepIDs  bool              `json:"keep_ids,omitempty"`
	LevelCap int               `json:"level_cap,omitempty"`
	Sep      string            `json:"separator,omitempty"` // the CSV field separator, "" for ","
	Holdout  float64           `json:"holdout"`
	Test     float64           `json:"test"`
	// Network.
	Hidden     []int   `json:"hidden"`
	Activation string  `json:"activation"`
	NoConstant bool    `json:"no_constant,omitempty"`
	Init       string  `json:"init"`
	Rho0       float64 `json:"rho0"`
	Norm       string  `json:"norm"`
	Hold       string  `json:"hold"`
	Plain      bool    `json:"plain_readout,omitempty"`
	BatchNorm  bool    `json:"batch_norm,omitempty"`
	Float      int     `json:"float"`
	// Training.
	Loss     string  `json:"loss"`
	Balance  bool    `json:"balance,omitempty"`
	LR       float64 `json:"learning_rate"`
	Schedule string  `json:"schedule"`
	Batch    int     `json:"batch"`
	Draw     string  `json:"draw"`
	Momentum float64 `json:"momentum"`
	Nesterov bool    `json:"nesterov,omitempty"`
	Epochs   int     `json:"epochs"`
	Decay    float64 `json:"weight_decay"`
	Temp     float64 `json:"temperature"`
	Target   float64 `json:"target_loss,omitempty"`
	Seed     uint64  `json:"seed"`
	// The training procedure (optim/recipe): the step factor when the
	// learning rate is measured, the warm-up, the patience, the metric the
	// epochs are ranked by, and whether a degenerate model fails the run.
	StepFactor float64 `json:"step_factor,omitempty"`
	Warmup     int     `json:"warmup"`
	Patience   int     `json:"patience"`
	Metric     string  `json:"metric"`
	Strict     bool    `json:"strict,omitempty"`
	Search     int     `json:"search,omitempty"`
	// How the saved model answers (recipe.FitDecision): the two-class
	// threshold ("auto": chosen on the validation rows for the metric;
	// "zero": a positive score means the second class; or a number), the
	// calibration, the prediction sets' coverage and the reject option's
	// target error (0: none).
	Threshold   string  `json:"threshold,omitempty"`
	NoCalibrate bool    `json:"no_calibration,omitempty"`
	Coverage    float64 `json:"coverage,omitempty"`
	TargetError float64 `json:"target_error,omitempty"`
	// StepChanges records every change of the step size made on resuming
	// (-lr or -step-factor given with -resume), oldest first; LR and
	// StepFactor above are the settings in force now.
	StepChanges []stepChange `json:"step_changes,omitempty"`
	// Run records the data read (by content), the command lines and the
	// build (record.go); it is not a setting.
	Run *runRecord `json:"run,omitempty"`
}

// stepChange is one change of the step size when a run resumed.
type stepChange struct {
	// Epoch is the epoch the run resumed after.
	Epoch int `json:"after_epoch"`
	// LR and StepFactor are the new settings; the one not given is
	// omitted.
	LR         float64 `json:"learning_rate,omitempty"`
	StepFactor float64 `json:"step_factor,omitempty"`
	// Was is the base step size η the run had reached when it stopped.
	Was float64 `json:"was,omitempty"`
}

// defaultConfig is the command line's defaults: the training procedure's
// own (recipe.Defaults, chosen by the benchmark suite), spelled as flags.
// Epochs 0 and patience 0 mean the procedure's defaults, which stretch on
// small training sets (recipe.MinSteps, recipe.PatienceSteps).
func defaultConfig() config {
	d := recipe.Defaults()
	return config{Missing: "impute", Holdout: 0.2, Hidden: d.Hidden, Activation: "relu", Init: "he", Rho0: d.Rho0,
		Norm: d.Norm.String(), Hold: "multiplier", Float: 32, Loss: "square", LR: 0, Schedule: "warm-cosine",
		Batch: d.Batch, Draw: "shuffled", Momentum: d.Momentum, Epochs: 0, Decay: d.Decay, Seed: 1,
		StepFactor: d.StepFactor, Warmup: d.Warmup, Patience: 0, Metric: d.Metric.String(), Threshold: defaultThreshold()}
}

// defaultThreshold spells recipe.DefaultDecision's threshold rule as the
// -threshold flag does.
func defaultThreshold() string {
	if recipe.DefaultDecision().Rule == recipe.ThresholdForMetric {
		return "auto"
	}
	return "zero"
}

// thresholdRule reads -threshold.
func (c *config) thresholdRule() (recipe.ThresholdRule, float64, error) {
	switch c.Threshold {
	case "":
		return recipe.DefaultDecision().Rule, 0, nil
	case "auto":
		return recipe.ThresholdForMetric, 0, nil
	case "zero":
		return recipe.ThresholdZero, 0, nil
	}
	v, err := strconv.ParseFloat(c.Threshold, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, 0, fmt.Errorf("-threshold %q: want auto, zero or a number such as 0.25", c.Threshold)
	}
	return recipe.ThresholdGiven, v, nil
}

// decisionOptions are the settings recipe.FitDecision takes.
func (c *config) decisionOptions() recipe.DecisionOptions {
	rule, t, _ := c.thresholdRule()
	m, _ := recipe.ParseMetric(c.Metric)
	return recipe.DecisionOptions{Rule: rule, Threshold: t, Metric: m, NoCalibration: c.NoCalibrate,
		Coverage: c.Coverage, TargetError: c.TargetError, Seed: c.Seed}
}

// bind registers the flags that set c.
func (c *config) bind(fs *flag.FlagSet) {
	fs.StringVar(&c.Data, "data", c.Data, "CSV `file` with a header row, UTF-8; - reads standard input")
	fs.StringVar(&c.Images, "images", c.Images, "IDX `file` of images (with -labels), instead of -data")
	fs.StringVar(&c.Labels, "labels", c.Labels, "IDX `file` of labels for -images")
	fs.StringVar(&c.Label, "label", c.Label, "`name` of the CSV column holding the class")
	c.Kinds = map[string]string{}
	fs.Var(mapFlag(c.Kinds), "kind", "force column kinds: `name=numeric|categorical`, comma-separated or repeated")
	fs.Var((*listFlag)(&c.Skip), "skip", "comma-separated `columns` to leave out")
	fs.StringVar(&c.Missing, "missing", c.Missing, "what to do with missing cells: `impute|drop|fail` (impute: mean or most frequent level of the training rows; fail refuses them)")
	fs.Var((*listFlag)(&c.Markers), "na", "comma-separated cell `values` that mean missing (default \"\",NA,NaN,null)")
	fs.BoolVar(&c.UnitNorm, "unit-norm", c.UnitNorm, "scale every input row to unit length after encoding")
	fs.BoolVar(&c.KeepIDs, "keep-ids", c.KeepIDs, "keep categorical columns whose values are nearly all distinct (identifiers, timestamps, free text), which are refused otherwise")
	fs.StringVar(&c.Sep, "sep", c.Sep, "field `separator` of the CSV data: one character, or \"tab\" (default \",\")")
	fs.IntVar(&c.LevelCap, "level-cap", c.LevelCap, "keep the `N` most frequent categories of each categorical column that has more than N, and encode every other value, including ones not seen in training, as one \"other\" feature (0: keep every category)")
	fs.BoolVar(&c.NewAsNil, "unknown-zero", c.NewAsNil, "encode a category unseen in training as all zeros instead of failing")
	fs.Float64Var(&c.Holdout, "holdout", c.Holdout, "`fraction` of rows held out for validation (stratified)")
	fs.Float64Var(&c.Test, "test", c.Test, "`fraction` of rows held out for a final test (stratified)")
	fs.Var((*intsFlag)(&c.Hidden), "hidden", "hidden layer `widths`, comma-separated; none for a linear model")
	fs.StringVar(&c.Activation, "act", c.Activation, "activation: `relu|smooth:β|poly:degree:lo:hi`")
	fs.BoolVar(&c.NoConstant, "no-constant", c.NoConstant, "do not append the constant-1 feature that stands in for biases")
	fs.StringVar(&c.Init, "init", c.Init, "initial weights: `he|lecun` normal")
	fs.Float64Var(&c.Rho0, "rho0", c.Rho0, "initial `scale` ρ0 = ∏‖W_k‖ (0 keeps the scheme's)")
	fs.StringVar(&c.Norm, "norm", c.Norm, "weight normalization: `none|layer|global|unit`")
	fs.StringVar(&c.Hold, "hold", c.Hold, "how directions keep unit norm: `multiplier|projection`")
	fs.BoolVar(&c.Plain, "plain-readout", c.Plain, "leave the readout layer out of weight normalization")
	fs.BoolVar(&c.BatchNorm, "batchnorm", c.BatchNorm, "batch normalization after each hidden layer, before its activation, with a learned per-unit scale and no shift (running mean and variance for predictions); needs -norm none, since it makes a layer's weight scale irrelevant")
	fs.IntVar(&c.Float, "float", c.Float, "arithmetic: `32|64` bits")
	fs.StringVar(&c.Loss, "loss", c.Loss, "`square|rescaled:K:M|cross-entropy|logistic|exponential`")
	fs.BoolVar(&c.Balance, "balance", c.Balance, "weight each class inversely to its frequency")
	fs.Float64Var(&c.LR, "lr", c.LR, "learning `rate` η (0: measured, -step-factor × the stability threshold of the loss curvature)")
	fs.Float64Var(&c.StepFactor, "step-factor", c.StepFactor, "with a measured rate, η = `factor` × 2(1+μ)/λ_max, λ_max the largest curvature on 512 training rows")
	fs.StringVar(&c.Schedule, "schedule", c.Schedule, "learning-rate schedule: `warm-cosine|constant|step:EPOCHS:FACTOR|cosine:FLOOR` (warm-cosine: linear warm-up over -warmup epochs, then cosine to 1%)")
	fs.IntVar(&c.Warmup, "warmup", c.Warmup, "`epochs` of linear warm-up from η/10 (warm-cosine schedule)")
	fs.IntVar(&c.Batch, "batch", c.Batch, "`rows` per step (0: the whole training set)")
	fs.StringVar(&c.Draw, "draw", c.Draw, "minibatches: `shuffled` epochs or independent draws with replacement")
	fs.Float64Var(&c.Momentum, "momentum", c.Momentum, "heavy-ball momentum `μ` in [0, 1)")
	fs.BoolVar(&c.Nesterov, "nesterov", c.Nesterov, "use Nesterov momentum")
	fs.IntVar(&c.Epochs, "epochs", c.Epochs, "most `epochs` to train (0: 100, more on small sets so that the run takes 3000 steps, fewer on large ones so that it takes at most 60000)")
	fs.IntVar(&c.Patience, "patience", c.Patience, "stop after `N` epochs without a better validation score (0: 15, more on small sets; -1 never)")
	fs.StringVar(&c.Metric, "metric", c.Metric, "rank epochs on the validation rows by `accuracy|balanced|macro-f1|auc` (balanced accuracy; macro-F1; ROC AUC of the scores, two classes only); ties go to the larger minimum margin")
	fs.IntVar(&c.Search, "search", c.Search, "race `N` (2 to 8) variations of these settings (step factor, ρ0, λ, width) by successive halving on the validation rows and keep the best (0: train these settings only)")
	fs.StringVar(&c.Threshold, "threshold", c.Threshold, "two classes: the score above which the answer is the second class: `auto|zero|NUMBER` (auto: chosen on the validation rows for -metric, balanced accuracy for auc)")
	fs.BoolVar(&c.NoCalibrate, "no-calibration", c.NoCalibrate, "do not fit calibrated probabilities (Platt scaling for two classes, a temperature for more) on the validation rows")
	fs.Float64Var(&c.Coverage, "coverage", c.Coverage, "also store prediction sets that hold the true class with this `probability` (such as 0.9), calibrated on validation rows; 0: none")
	fs.Float64Var(&c.TargetError, "target-error", c.TargetError, "let the model abstain where its normalized margin is below the floor that keeps the answered validation rows' error at this `rate` (such as 0.05); 0: always answer")
	fs.BoolVar(&c.Strict, "strict", c.Strict, "fail (exit 1) when the chosen model is degenerate: one class only, no better than the majority class, or a class never recognized")
	fs.Float64Var(&c.Decay, "decay", c.Decay, "weight decay `λ` (on the scales when normalized)")
	fs.Float64Var(&c.Temp, "temp", c.Temp, "Langevin `temperature` T: noise √(2ηT) per step")
	fs.Float64Var(&c.Target, "target-loss", c.Target, "stop once an epoch's mean loss is at most this `loss`")
	fs.Uint64Var(&c.Seed, "seed", c.Seed, "random `seed` for splits, initialization, batches and noise")
}

func (c *config) check() error {
	bad := func(format string, args ...any) error { return usageError{fmt.Errorf(format, args...)} }
	switch {
	case c.Data == "" && c.Images == "":
		return bad("train: give -data FILE.csv (with -label) or -images and -labels")
	case c.Data != "" && c.Images != "":
		return bad("train: give -data or -images, not both")
	case c.Data != "" && c.Label == "":
		return bad("train: -label names the CSV column holding the class")
	case c.Images != "" && c.Labels == "":
		return bad("train: -images needs -labels")
	case c.Missing != "fail" && c.Missing != "drop" && c.Missing != "impute":
		return bad("train: -missing %q: want fail, drop or impute", c.Missing)
	case !(c.Holdout >= 0 && c.Test >= 0 && c.Holdout+c.Test < 1):
		return bad("train: -holdout %v and -test %v must be fractions summing to less than 1", c.Holdout, c.Test)
	case c.Float != 32 && c.Float != 64:
		return bad("train: -float %d: want 32 or 64", c.Float)
	case c.Epochs < 0:
		return bad("train: -epochs %d: want 0 (the default) or a number of epochs", c.Epochs)
	case !(c.LR >= 0) || math.IsInf(c.LR, 0):
		return bad("train: -lr %v: want 0 (measured) or a positive rate", c.LR)
	case !(c.StepFactor > 0 && c.StepFactor <= 1):
		return bad("train: -step-factor %v: want a fraction in (0, 1]", c.StepFactor)
	case !(c.Momentum >= 0 && c.Momentum < 1):
		return bad("train: -momentum %v: want μ in [0, 1)", c.Momentum)
	case !(c.Decay >= 0) || math.IsInf(c.Decay, 0):
		return bad("train: -decay %v: want 0 (none) or a positive λ", c.Decay)
	case !(c.Temp >= 0) || math.IsInf(c.Temp, 0):
		return bad("train: -temp %v: want 0 (no noise) or a positive temperature", c.Temp)
	case !(c.Target >= 0) || math.IsInf(c.Target, 0):
		return bad("train: -target-loss %v: want 0 (none) or a positive loss", c.Target)
	case !(c.Rho0 >= 0) || math.IsInf(c.Rho0, 0):
		return bad("train: -rho0 %v: want 0 (the initialization's own scale) or a positive scale", c.Rho0)
	case c.Sep != "" && !validSeparator(c.Sep):
		return bad("train: -sep %q: give one character other than a quote or a line break (or \"tab\")", c.Sep)
	case c.LevelCap < 0:
		return bad("train: -level-cap %d: want 0 (every category) or a number of categories to keep", c.LevelCap)
	case c.Batch < 0:
		return bad("train: -batch %d: want 0 (the whole training set) or a number of rows", c.Batch)
	case c.Warmup < 0:
		return bad("train: -warmup %d: want 0 (none) or a number of epochs", c.Warmup)
	case c.Patience < -1:
		return bad("train: -patience %d: want -1 (never stop early), 0 (the default) or a number of epochs", c.Patience)
	}
	if c.BatchNorm && c.Norm != "none" {
		// Batch normalization divides out the scale of the weights before
		// it, so a weight-normalized scale ρ_k there would get no gradient
		// from the data, only from the decay, and shrink towards 0.
		return bad("train: -batchnorm needs -norm none: batch normalization makes the scale of each hidden layer's weights irrelevant, so weight normalization's scales would only shrink under -decay")
	}
	if _, err := recipe.ParseMetric(c.Metric); err != nil {
		return bad("train: -metric: %v", err)
	}
	if _, _, err := c.thresholdRule(); err != nil {
		return bad("train: %v", err)
	}
	switch {
	case !(c.Coverage >= 0 && c.Coverage < 1):
		return bad("train: -coverage %v: want 0 (no prediction sets) or a level below 1, such as 0.9", c.Coverage)
	case !(c.TargetError >= 0 && c.TargetError < 1):
		return bad("train: -target-error %v: want 0 (always answer) or a rate below 1, such as 0.05", c.TargetError)
	case c.Coverage > 0 && c.NoCalibrate:
		return bad("train: -coverage needs calibrated probabilities: leave out -no-calibration")
	}
	if c.Search < 0 || c.Search == 1 || c.Search > 8 {
		return bad("train: -search %d: want 0 (no search) or 2 to 8 candidates", c.Search)
	}
	for name, k := range c.Kinds {
		if k != "numeric" && k != "categorical" {
			return bad("train: -kind %s=%s: want numeric or categorical", name, k)
		}
	}
	for _, name := range c.Skip {
		if c.Label != "" && strings.TrimSpace(name) == strings.TrimSpace(c.Label) {
			return bad("train: -skip lists the label column %q; the classes come from it: take it out of -skip, or name another column with -label", name)
		}
	}
	return nil
}

func (c *config) record() json.RawMessage {
	b, _ := json.Marshal(c)
	return b
}

func (c *config) csvOptions() data.CSVOptions {
	o := data.CSVOptions{Label: c.Label, Ignore: c.Skip, Missing: c.Markers, Kinds: map[string]data.Kind{}, Advise: flagWords}
	if c.Sep != "" {
		o.Comma, _ = separator(c.Sep) // checked by validate
	}
	for name, k := range c.Kinds {
		o.Kinds[name] = data.Numeric
		if k == "categorical" {
			o.Kinds[name] = data.Categorical
		}
	}
	switch c.Missing {
	case "drop":
		o.OnMissing = data.MissingDrop
	case "impute":
		o.OnMissing = data.MissingKeep
	}
	return o
}

// flagWords words the reader's advice in train's flags, so that its
// messages name no field of the library's options; a setting the command
// line has no flag for is left out (the reader then says what to do in
// plain words).
func flagWords(f data.Fix) string {
	policy := map[string]string{"MissingDrop": "drop", "MissingKeep": "impute", "MissingFail": "fail"}
	switch f.Setting {
	case "Label":
		return "-label"
	case "Kinds":
		if f.Column == "" {
			return "-kind"
		}
		return "-kind " + f.Column + "=" + strings.ToLower(f.Value)
	case "Ignore":
		return strings.TrimSpace("-skip " + f.Column)
	case "Missing":
		return "-na"
	case "OnMissing":
		if p := policy[f.Value]; p != "" {
			return "-missing " + p
		}
		return "-missing"
	case "OnMissingIn":
		// There is no flag for one column; -missing sets every column's,
		// and is the advice for one column too.
		if p := policy[f.Value]; p != "" && f.Column != "" {
			return "-missing " + p
		}
	}
	return ""
}

// buildNetwork makes the network the settings describe.
func buildNetwork[T net.Float](c *config, inputs, outputs int) (*net.Network[T], error) {
	b := net.NewBuilder[T](inputs)
	if !c.NoConstant {
		b.ConstantFeature("one")
	}
	name, args, err := split(c.Activation)
	if err != nil {
		return nil, usageError{fmt.Errorf("train: -act %w", err)}
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case name == "smooth" && len(args) == 1 && !(args[0] > 0 && finite(args[0])):
		return nil, usageError{fmt.Errorf("train: -act %q: the sharpness β must be positive (larger is closer to ReLU)", c.Activation)}
	case name == "poly" && len(args) == 3 && !(args[0] >= 1 && args[0] <= net.PolyMaxDegree):
		return nil, usageError{fmt.Errorf("train: -act %q: the degree must be 1 to %d", c.Activation, net.PolyMaxDegree)}
	case name == "poly" && len(args) == 3 && !(args[1] < args[2] && finite(args[1]) && finite(args[2])):
		return nil, usageError{fmt.Errorf("train: -act %q: the interval lo:hi must have lo < hi", c.Activation)}
	}
	for i, w := range c.Hidden {
		id := fmt.Sprint(i + 1)
		b.Dense("hidden"+id, w)
		if c.BatchNorm {
			b.BatchNorm("norm"+id, true, false)
		}
		switch {
		case name == "relu" && len(args) == 0:
			b.ReLU("relu" + id)
		case name == "smooth" && len(args) == 1:
			b.SmoothReLU("smooth"+id, args[0])
		case name == "poly" && len(args) == 3 && args[0] == math.Trunc(args[0]):
			b.PolyReLU("poly"+id, int(args[0]), args[1], args[2], net.FitLeastSquares)
		default:
			return nil, usageError{fmt.Errorf("train: -act %q: want relu, smooth:β or poly:degree:lo:hi", c.Activation)}
		}
	}
	n, err := b.Readout("readout", outputs).Build()
	if err != nil {
		return nil, usageError{fmt.Errorf("train: %w", err)}
	}
	scheme := net.HeNormal
	switch c.Init {
	case "he":
	case "lecun":
		scheme = net.LeCunNormal
	default:
		return nil, usageError{fmt.Errorf("train: -init %q: want he or lecun", c.Init)}
	}
	if err := n.Init(net.InitSettings{Scheme: scheme, Rho0: c.Rho0, Seed: c.Seed}); err != nil {
		return nil, usageError{fmt.Errorf("train: -rho0: %w", err)}
	}
	if rho := n.Rho(); math.IsInf(rho, 0) || math.IsNaN(rho) {
		return nil, usageError{fmt.Errorf("train: -rho0 %v is too large: the initial weights overflow; give a scale near 1", c.Rho0)}
	}
	return n, nil
}

// normOptions reports the normalization the settings ask for, nil for none.
func (c *config) normOptions() (*normalize.Options, error) {
	o := &normalize.Options{SkipReadout: c.Plain}
	switch c.Norm {
	case "none":
		return nil, nil
	case "layer":
	case "global":
		o.Scale = normalize.Global
	case "unit":
		o.PerUnit = true
	default:
		return nil, usageError{fmt.Errorf("train: -norm %q: want none, layer, global or unit", c.Norm)}
	}
	switch c.Hold {
	case "multiplier":
	case "projection":
		o.Hold = normalize.Projection
	default:
		return nil, usageError{fmt.Errorf("train: -hold %q: want multiplier or projection", c.Hold)}
	}
	return o, nil
}

func makeLoss[T net.Float](c *config, outputs int, weights []float64) (loss.Func[T], error) {
	name, args, err := split(c.Loss)
	if err != nil {
		return nil, usageError{fmt.Errorf("train: -loss %w", err)}
	}
	var l loss.Func[T]
	switch {
	case name == "square" && len(args) == 0:
		l = loss.Square[T]{}
	case name == "rescaled" && len(args) == 2:
		if !(args[0] >= 0 && args[1] >= 0) || math.IsInf(args[0], 0) || math.IsInf(args[1], 0) {
			return nil, usageError{fmt.Errorf("train: -loss %q: K and M must be positive (0 means 1)", c.Loss)}
		}
		l = loss.Rescaled[T]{K: args[0], M: args[1]}
	case name == "rescaled" && len(args) == 0:
		l = loss.Rescaled[T]{}
	case name == "cross-entropy" && len(args) == 0:
		if outputs == 1 {
			return nil, usageError{fmt.Errorf("train: -loss cross-entropy needs one output per class; with two classes use logistic or square")}
		}
		l = loss.CrossEntropy[T]{}
	case (name == "logistic" || name == "exponential") && len(args) == 0:
		if outputs != 1 {
			return nil, usageError{fmt.Errorf("train: -loss %s is for two classes; the data has %d", name, outputs)}
		}
		if name == "logistic" {
			l = loss.Logistic[T]{}
		} else {
			l = loss.Exponential[T]{}
		}
	default:
		return nil, usageError{fmt.Errorf("train: -loss %q: want square, rescaled:K:M, cross-entropy, logistic or exponential", c.Loss)}
	}
	if weights != nil {
		l = loss.Weighted[T]{Inner: l, Weights: weights}
	}
	return l, nil
}

// baseSettings describes the settings a sweep's points share, for its
// fingerprint and results file; the points themselves run the training
// procedure with plan.
func (c *config) baseSettings() (optim.Settings, error) {
	p, err := c.plan()
	if err != nil {
		return optim.Settings{}, err
	}
	s := optim.Settings{LearningRate: c.LR, BatchSize: c.Batch, Sampling: p.Sampling, Momentum: c.Momentum, Nesterov: c.Nesterov,
		WeightDecay: c.Decay, Temperature: c.Temp, Epochs: c.Epochs, TargetLoss: c.Target, Seed: c.Seed, Schedule: p.Schedule}
	if s.Schedule == nil {
		s.Schedule = optim.Cosine{Floor: recipe.Defaults().Floor} // the warm-up is recorded with the config
	}
	return s, nil
}

// plan is the training procedure's plan for these settings.
func (c *config) plan() (recipe.Plan, error) {
	m, err := recipe.ParseMetric(c.Metric)
	if err != nil {
		return recipe.Plan{}, usageError{fmt.Errorf("train: -metric: %w", err)}
	}
	p := recipe.Plan{Hidden: c.Hidden, Rho0: c.Rho0, Batch: c.Batch, Momentum: c.Momentum, Decay: c.Decay,
		LearningRate: c.LR, StepFactor: c.StepFactor, Warmup: c.Warmup, Epochs: c.Epochs, Patience: c.Patience,
		Metric: m, Seed: c.Seed, Strict: c.Strict, Temperature: c.Temp, Nesterov: c.Nesterov, TargetLoss: c.Target,
		BatchNorm: c.BatchNorm}
	// Zero means "the default" to a Plan and "none" on the command line.
	if c.Momentum == 0 {
		p.Momentum = -1
	}
	if c.Decay == 0 {
		p.Decay = -1
	}
	if c.Warmup == 0 {
		p.Warmup = -1
	}
	if c.Batch == 0 {
		p.Batch = math.MaxInt32 // the whole training set
	}
	switch c.Norm {
	case "layer":
		p.Norm = recipe.PerLayer
	case "global":
		p.Norm = recipe.Global
	case "unit":
		p.Norm = recipe.PerUnit
	case "none":
		p.Norm = recipe.Plain
	}
	switch c.Draw {
	case "shuffled":
	case "independent":
		p.Sampling = optim.Independent
	default:
		return p, usageError{fmt.Errorf("train: -draw %q: want shuffled or independent", c.Draw)}
	}
	name, args, err := split(c.Schedule)
	if err != nil {
		return p, usageError{fmt.Errorf("train: -schedule %w", err)}
	}
	switch {
	case name == "warm-cosine" && len(args) == 0:
	case name == "constant" && len(args) == 0:
		p.Schedule = optim.Constant{}
	case name == "step" && len(args) == 2 && args[0] >= 1 && args[0] == math.Trunc(args[0]) && args[1] > 0 && args[1] <= 1:
		p.Schedule = optim.StepDecay{Epochs: int(args[0]), By: args[1]}
	case name == "cosine" && len(args) == 1 && args[0] >= 0 && args[0] <= 1:
		p.Schedule = optim.Cosine{Floor: args[0]}
	default:
		return p, usageError{fmt.Errorf("train: -schedule %q: want warm-cosine, constant, step:EPOCHS:FACTOR (whole epochs, a factor in (0, 1]) or cosine:FLOOR (a fraction in [0, 1])", c.Schedule)}
	}
	return p, nil
}

func joinClasses(c []string) string { return strings.Join(c, ", ") }

// Package sweep trains a classifier at every point of a grid of
// hyperparameters — initial scale ρ0, weight decay λ, learning rate η,
// Langevin temperature T, and seeds — and ranks the runs, so that these
// can be chosen by validation accuracy with the normalized margin and the
// norm-based bound as tie-breakers, as the square-loss theory suggests.
// The same sweep runs in one process or split into shards on a cluster,
// and merging the shards gives the ranking one process would.
//
// # Grid and order
//
// A Grid lists the values of each axis and the settings every point
// shares (Base, an optim.Settings). Points enumerates the Cartesian
// product in a fixed order — ρ0 slowest, then λ, η, T, and the seed
// fastest, by the positions of the values on their axes — and numbers
// the points 0, 1, … in that order. Grid.Settings gives a point's
// optim.Settings. A grid has a Fingerprint (SHA-256 of its axes, the
// shared settings and a caller's Context describing data and network)
// that results files carry and Merge compares.
//
// # Running, concurrently and in shards
//
// Run calls a TrainFunc for every point, at most workers at a time
// (default GOMAXPROCS), on goroutines of its own; the function trains one
// point and fills a Result, typically with Measure. A run that fails
// (non-finite loss at a large learning rate, say) is recorded with its
// error and ranked last; a canceled context stops the sweep.
//
// Grid.Shard(i, n) is shard i of n: the points with index ≡ i (mod n),
// round-robin, so that every shard gets a share of each axis and they
// finish together. The n shards partition the grid. ParseShard reads
// "i/n" or "/n"; "/n" takes i from JOB_COMPLETION_INDEX, the variable a
// Kubernetes Indexed Job sets in each pod (see ParseShard for the exact
// rules, and docs/sweeps.md for a manifest).
//
// # Ranking
//
// Rank orders results: successful before failed; higher validation
// accuracy; then larger minimum normalized margin of the training rows;
// then smaller margin bound (gauge.BoundOf, on the training rows); then
// smaller point index. The order is total, so it does not depend on how
// the results were produced. The margin and the bound are tie-breakers
// only: the theory links large normalized margins and small norm-based
// bounds to low test error, but neither predicts it for one model, and
// the bound is loose (usually above 1; see package gauge).
//
// # Files and merging
//
// A Results value (NewResults) is one shard's results; WriteTo writes it
// as JSON Lines — a header line with the format, the fingerprint, the
// shard and the grid's description, then one line per point in point
// order, NaN written as null — and ReadResults reads it back, checking
// the fingerprint against the description and every result against the
// grid and the shard. Merge reads several files and combines them into
// one ranking, refusing files of different grids (ErrMismatch), a point
// with two results or a shard given twice (ErrDuplicate), and a point
// with none (ErrMissing). A results file is written only when its shard
// is complete, and atomically, so a merge never reads a partial one.
//
// # The best model
//
// The package does not hold models. The rhomb command keeps, in each
// process, the model of the best run so far in memory (comparing by Rank's
// order as runs finish), saves it when the sweep or shard ends, and names
// it in the results file (Results.Model); a merge copies the winner's
// model from its shard instead of retraining it. Because training is
// deterministic for a seed, retraining the winning point would give the
// same bits, which is the alternative for callers who do not want to keep
// models.
//
// # Summaries
//
// WriteTable prints a ranking as a text table; the plotting package
// (optim/gauge/plot: HeatMap, SaveHeatMap) draws the validation score (or
// another measure) over ρ0 × λ, averaged over the other axes.
//
// # Cautions
//
// Choosing among many runs by validation accuracy overfits the validation
// rows a little: the best of many is optimistic. Judge the chosen model on
// a test set that the sweep never saw. A classifier is no safety
// guarantee: where its output can drive decisions that hurt someone,
// validate it on your own data and follow local codes and licensed
// practice.
package sweep

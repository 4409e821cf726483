// Package classify loads a rhomb model file and classifies rows with it,
// for services and edge binaries. It imports only the standard library,
// data/prep and internal/container (the model file's container layer),
// both themselves standard-library only — never the training code or
// gonum, so a program that only predicts stays small; a test checks the
// import graph.
//
// # Loading
//
// Load and Read parse the format of docs/model-file.md and validate the
// file the way that page asks — magic, version, sizes and offsets against
// the file's length before allocating, tensors tiling the data, SHA-256,
// the graph against its weight tensors, finite weights, the pipeline —
// and report the first problem as a *FileError wrapping one of ErrMagic,
// ErrVersion, ErrTruncated, ErrChecksum, ErrHeader, ErrShape or ErrWeight.
// A Model never changes after loading and is safe for concurrent use.
//
// # Classifying
//
// A row comes in one of four forms: a feature vector (ClassifyVector,
// ClassifyVectors), raw cells in input order (ClassifyFields), raw cells
// by field name (ClassifyMap, ClassifyMaps), or a struct of the caller's
// with one field per input (Bind, then Binding.Classify). Raw cells and
// struct fields go through the model's own prep.Pipeline — the encoder the
// training rows went through — so a value is encoded to the same bits as
// in training. Each call returns an Answer: the class index, its name, and
// the network's outputs.
//
// Buffers live in a Work, owned by the caller: one per goroutine (or one
// per request from a sync.Pool). With a Work, a prediction allocates
// nothing once the Work has seen the batch size; a test proves it with
// testing.AllocsPerRun.
//
// Bad rows are errors, never silent defaults: a *prep.FieldError naming
// the field (for a batch, inside a *RowError naming the row) wrapping
// prep.ErrRagged (wrong number of features or fields), prep.ErrNotNumber
// (a NaN feature, or text in a numeric field), prep.ErrInfinite,
// prep.ErrMissing or prep.ErrUnknownCategory; errors.Is finds them.
//
// # Same bits as training
//
// For a float64 model the scores are bit for bit those of the training
// library's forward pass (net.Network.Forward) on the same features. Each
// dense layer's sums follow the rounding rule that the training library's
// matrix product documents (internal/kern): fused multiply-adds over
// blocks of 256 terms, in order, the blocks' sums added in order. Every
// other product that is added to something is rounded first, so that the
// compiler cannot fuse it. A test checks the bits over every kind of model
// the trainer makes. Since math.FMA rounds the same everywhere, a model
// with ReLU layers gives the same bits on arm64 as on amd64; smoothed and
// polynomial layers call math.Exp, math.Log1p and math.Cos, whose
// implementations differ between architectures in the last bit.
//
// Two exceptions. A polynomial ReLU uses the fitted coefficients the file
// stores; a file written before they were stored has its least-squares
// fits refitted here by the closed form of a discretely orthogonal basis,
// where training solves the same problem by Householder QR, and those
// coefficients agree to a few units in the last place, not bit for bit.
// And a float32 model is computed in float64 here, with its weights widened exactly,
// whereas the training library computes it in float32; its scores equal
// those of the float64 training forward pass on the widened weights.
//
// # float32 or float64
//
// A float32 model file holds its weights at half the size. Convert at
// export time (load the float64 file as float32 in package modelfile and
// save it); MaxDifference reports how far the two models' scores differ on
// rows you choose, such as the training rows.
//
// # Caution
//
// A classifier is no safety guarantee. Where a model's output drives an
// alarm, a safety interlock, a credit decision or anything else that can
// hurt someone, validate it on your own data, keep a person or an
// independent protection in the loop, and follow the local codes and
// licensed practice that govern that decision.
package classify

// Package classify loads a rhomb model file and classifies rows with it,
// for services and edge binaries: `rhomb classify` and `rhomb check`, the
// HTTP server (package endpoint) and the edge program all read and compute
// through it, so one file gives the same bits in every tool. It imports
// only the standard library, data/prep, the model file's schema
// (net/schema, with internal/container) and the forward pass's
// arithmetic (internal/arith), all themselves standard-library only —
// never the training code or gonum, so a program that only predicts stays
// small; a test checks the import graph.
//
// # Loading
//
// Load and Read check the file with schema.Parse, as the training
// library's reader does, so the two accept exactly the same files — magic,
// version, sizes and offsets against the file's length before allocating,
// tensors tiling the data, SHA-256, the graph against its weight tensors,
// normalized parameters, finite values, the pipeline, the decision maps —
// and report the first problem as a *FileError (schema.Error) wrapping one
// of ErrMagic, ErrVersion, ErrTruncated, ErrChecksum, ErrHeader, ErrShape
// or ErrWeight.
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
// in training. Each call returns an Answer: the class index, its name, the
// network's outputs and the normalized margin; and, when the file holds
// them (see docs/model-file.md, "Decision"), the calibrated probabilities,
// the prediction set and whether the model abstains.
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
// The scores are bit for bit those of the training library's forward pass
// (net.Network.Forward) on the same features, in the model's own element
// type: a float32 model is computed in float32, after its float64
// features are rounded to float32 as training's data set is, and its
// scores widened exactly to float64. The arithmetic is one copy shared
// with training (internal/arith): each dense layer's sums follow the
// rounding rule of the training library's matrix product (fused
// multiply-adds over blocks of 256 terms, in order, the blocks' sums added
// in order), and the smoothed and polynomial rectifiers, including the
// polynomial's fit, are the same functions. Tests check the bits over
// every kind of model the trainer makes, in both element types. Since
// FMA rounds the same everywhere, a model with ReLU layers gives the same
// bits on arm64 as on amd64; smoothed and polynomial layers call math.Exp,
// math.Log1p and math.Cos, whose implementations differ between
// architectures in the last bit.
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

// Package modelfile reads and writes rhomb's model files: one
// self-describing file holding a trained network, the preprocessing that
// turns raw inputs into its features, its class names, how it was trained,
// and, for a checkpoint, the trainer's state to resume from.
//
// The format is rhomb's own, documented byte by byte in docs/model-file.md
// so that other programs can read it: magic bytes and a format version, a
// JSON header, little-endian tensors, and a SHA-256 checksum over
// everything. Every dense layer's W is stored whatever the training
// parameterization, so a reader that knows nothing of weight normalization
// can still predict; a normalized model also stores its scales and
// directions, so training resumes from the exact same bits.
//
// Save writes atomically (temporary file, fsync, rename): an interrupted
// save never leaves a broken file behind. Load validates every size and
// offset against the file's length before allocating, checks the checksum,
// and reports a truncated, corrupted, wrong-version or inconsistent file as
// a *FormatError saying where.
package modelfile

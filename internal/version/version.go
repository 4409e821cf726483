// Package version holds rhomb's release version, written into model files.
package version

// Version is the library's version, semantic versioning.
const Version = "0.1.0"

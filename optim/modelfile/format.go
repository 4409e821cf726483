package modelfile

import (
	"github.com/rhomb/rhomb/net/schema"
)

// Sentinel causes carried by FormatError: the model file format's own
// (package schema), the same values the serving reader (net/classify)
// reports, so errors.Is finds either name.
var (
	ErrMagic     = schema.ErrMagic
	ErrVersion   = schema.ErrVersion
	ErrTruncated = schema.ErrTruncated
	ErrChecksum  = schema.ErrChecksum
	ErrHeader    = schema.ErrHeader
	ErrShape     = schema.ErrShape
	ErrWeight    = schema.ErrWeight
)

// FormatError reports a model file that cannot be read, and where: the
// one error type of rhomb's model file readers (schema.Error).
type FormatError = schema.Error

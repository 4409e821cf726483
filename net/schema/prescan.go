package schema

import "fmt"

// Limits on the header's JSON that Parse checks in one pass over its
// bytes, before decoding anything, so that a header within MaxHeader
// cannot make the decoder allocate far beyond the file's own size: a
// header of huge strings, of a million graph nodes, or of millions of
// small values.
const (
	// MaxString caps the length in bytes of any one string in the header
	// (a name, a class, a category, a record's text).
	MaxString = 1 << 20
	// MaxValues caps the number of JSON values in the header (every
	// number, string, literal, object and array counts one). The header
	// of a model with a wide pipeline and a long run holds a few thousand.
	MaxValues = 1 << 18
	// MaxDepth caps the nesting of objects and arrays.
	MaxDepth = 64
)

// prescan checks raw, the header's JSON, against MaxString, MaxValues,
// MaxDepth, MaxNodes (the elements of the top-level "graph") and
// MaxTensors (of "arrays", or "tensors" in a version-1 file). It reads each byte once and allocates
// nothing; it does not validate the JSON, which the decoder then does.
func prescan(raw []byte) error {
	var (
		depth, values, count int
		// key is the last top-level key read; counting names the
		// top-level array whose elements are being counted, at depth 2.
		key, counting string
	)
	isSpace := func(c byte) bool { return c == ' ' || c == '\t' || c == '\n' || c == '\r' }
	for i := 0; i < len(raw); i++ {
		c := raw[i]
		switch {
		case isSpace(c) || c == ':' || c == ',':
			continue
		case c == '}' || c == ']':
			if depth == 2 {
				counting = ""
			}
			depth--
			continue
		case c == '"':
			start := i + 1
			for i++; i < len(raw) && raw[i] != '"'; i++ {
				if raw[i] == '\\' {
					i++
				}
			}
			end := min(i, len(raw))
			if end-start > MaxString {
				return fmt.Errorf("a string of %d bytes at header byte %d exceeds the limit of %d", end-start, start, MaxString)
			}
			j := i + 1
			for j < len(raw) && isSpace(raw[j]) {
				j++
			}
			if j < len(raw) && raw[j] == ':' {
				if depth == 1 {
					key = string(raw[start:end])
				}
				continue // a key, not a value
			}
		}
		// A value starts at i.
		values++
		if values > MaxValues {
			return fmt.Errorf("the header holds more than %d values, the limit", MaxValues)
		}
		if counting != "" && depth == 2 {
			count++
			if counting == "graph" && count > MaxNodes {
				return fmt.Errorf("the graph has more than %d nodes, the limit", MaxNodes)
			}
			if (counting == "arrays" || counting == "tensors") && count > MaxTensors {
				return fmt.Errorf("more than %d tensors, the limit", MaxTensors)
			}
		}
		switch c {
		case '"':
		case '{', '[':
			if c == '[' && depth == 1 && (key == "graph" || key == "arrays" || key == "tensors") {
				counting, count = key, 0
			}
			depth++
			if depth > MaxDepth {
				return fmt.Errorf("the header nests deeper than %d levels", MaxDepth)
			}
		default: // a number or a literal: skip to its end
			for i+1 < len(raw) && !isSpace(raw[i+1]) && raw[i+1] != ',' && raw[i+1] != ']' && raw[i+1] != '}' && raw[i+1] != ':' {
				i++
			}
		}
	}
	return nil
}

// Package jsonout writes the JSON documents manyfold prints or saves
// (summaries, scan profiles, reports, manifests) in one form: indented by
// two spaces, ending in a newline, and with <, > and & as written, so that
// a derived target reads delay>15 rather than delay\u003e15.
package jsonout

import (
	"bytes"
	"encoding/json"
)

// Marshal returns v as an indented JSON document ending in a newline,
// without escaping <, > and & (the standard library escapes them for
// embedding in HTML, which these documents are not).
func Marshal(v any) ([]byte, error) {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", "  ")
	if err := enc.Encode(v); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

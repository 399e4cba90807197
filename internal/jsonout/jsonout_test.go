package jsonout_test

import (
	"encoding/json"
	"fmt"
	"testing"

	"manyfold/internal/jsonout"
)

func ExampleMarshal() {
	b, _ := jsonout.Marshal(map[string]any{"target": "delay>15", "rows": 3})
	fmt.Print(string(b))
	// Output:
	// {
	//   "rows": 3,
	//   "target": "delay>15"
	// }
}

// TestMarshalReadsBack: the document decodes to what was written, with
// the characters the standard library would escape.
func TestMarshalReadsBack(t *testing.T) {
	in := map[string]string{"a": "x<y & y>z", "b": "\u2028 \"quoted\""}
	b, err := jsonout.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	var out map[string]string
	if err := json.Unmarshal(b, &out); err != nil || out["a"] != in["a"] || out["b"] != in["b"] {
		t.Errorf("read back %v (%v) from %s", out, err, b)
	}
	if b[len(b)-1] != '\n' {
		t.Error("no final newline")
	}
}

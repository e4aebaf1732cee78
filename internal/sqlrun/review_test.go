package sqlrun

import (
	"bytes"
	"testing"
)

// A FLOAT column reads 0.1 in every format: JSON too, not the float64 widening
// 0.10000000149011612.
func TestReviewJSONFloat32(t *testing.T) {
	r := &Result{Columns: []string{"f", "l"}, Types: []string{"FLOAT", "FLOAT[]"},
		Rows: [][]any{{float32(0.1), []any{float32(2.3), nil}}}}
	var b bytes.Buffer
	if err := write(&b, FormatJSON, r); err != nil {
		t.Fatal(err)
	}
	if want := "[\n{\"f\":0.1,\"l\":[2.3,null]}\n]\n"; b.String() != want {
		t.Errorf("got %q\nwant %q", b.String(), want)
	}
}

package forest

import (
	"bytes"
	"os"
	"strconv"
	"strings"
	"testing"
)

// corpusBytes reads the one []byte value of a Go fuzz corpus file.
func corpusBytes(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	_, v, _ := strings.Cut(string(b), "\n")
	v = strings.TrimSuffix(strings.TrimPrefix(strings.TrimSpace(v), "[]byte("), ")")
	s, err := strconv.Unquote(v)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return []byte(s)
}

// A model written in format version 1 (before boosting existed) still decodes and scores
// exactly as the same model written today: databases keep their models across builds.
// testdata/models/mixed-forest.v1.cpsm is the "mixed-forest" fuzz seed as the version-1
// encoder wrote it (commit 920a298); the current seed file holds the same model in the
// current version.
func TestDecodeVersion1(t *testing.T) {
	old, err := os.ReadFile("testdata/models/mixed-forest.v1.cpsm")
	if err != nil {
		t.Fatal(err)
	}
	if old[4] != 1 {
		t.Fatalf("fixture is format version %d, want 1", old[4])
	}
	m1, err := Decode(old)
	if err != nil {
		t.Fatalf("decode version 1: %v", err)
	}
	cur, err := Decode(corpusBytes(t, "testdata/fuzz/FuzzDecode/seed-mixed-forest"))
	if err != nil {
		t.Fatal(err)
	}
	b1, err := m1.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	b2, err := cur.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(b1, b2) {
		t.Errorf("the version-1 model re-encodes to %d bytes that differ from today's encoding of the same model (%d bytes)", len(b1), len(b2))
	}
	if m1.Params.Loss != "" || m1.Params.LearningRate != 0 || m1.Boost != nil {
		t.Errorf("version 1 model carries boosting fields: %+v", m1.Params)
	}
}

// A model written in format version 2 (boosting, before the quantile and exposure
// controls) still decodes, and re-encodes in today's version to the same model, with
// those controls unset. testdata/models/breast-cancer-boosting.v2.cpsm is the
// "breast-cancer-boosting" fuzz seed as the version-2 encoder wrote it (commit c094de8).
func TestDecodeVersion2(t *testing.T) {
	old, err := os.ReadFile("testdata/models/breast-cancer-boosting.v2.cpsm")
	if err != nil {
		t.Fatal(err)
	}
	if old[4] != 2 {
		t.Fatalf("fixture is format version %d, want 2", old[4])
	}
	m2, err := Decode(old)
	if err != nil {
		t.Fatalf("decode version 2: %v", err)
	}
	if m2.Boost == nil || m2.Boost.Loss != LossLogistic || m2.Params.Quantile != 0 || m2.Params.Exposure != "" {
		t.Fatalf("version 2 model: boost %+v, quantile %v, exposure %q", m2.Boost, m2.Params.Quantile, m2.Params.Exposure)
	}
	b, err := m2.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if b[4] != encodingVersion {
		t.Fatalf("re-encoded as version %d, want %d", b[4], encodingVersion)
	}
	// Today's encoding adds 18 bytes to the params section (the quantile float, an
	// empty exposure string, the ridge float and the leaf_limit varint) and empty
	// sections 8, 9 and 10 (tag and length: 2 bytes each).
	if len(b) != len(old)+18+2+2+2 {
		t.Errorf("re-encoded to %d bytes, want %d", len(b), len(old)+18+2+2+2)
	}
	m3, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, m2, m3)
}

// A model written in format version 3 (before AdaBoost) still decodes, scores as before,
// and re-encodes in today's version to the same model with no AdaBoost record.
// testdata/models/iris-multinomial.v3.cpsm is the "iris-multinomial" fuzz seed as the
// version-3 encoder wrote it (the working tree of commit 90ec2cc).
func TestDecodeVersion3(t *testing.T) {
	old, err := os.ReadFile("testdata/models/iris-multinomial.v3.cpsm")
	if err != nil {
		t.Fatal(err)
	}
	if old[4] != 3 {
		t.Fatalf("fixture is format version %d, want 3", old[4])
	}
	m3, err := Decode(old)
	if err != nil {
		t.Fatalf("decode version 3: %v", err)
	}
	if m3.Boost == nil || m3.Boost.Loss != LossMultinomial || m3.AdaBoost != nil {
		t.Fatalf("version 3 model: boost %+v, adaboost %+v", m3.Boost, m3.AdaBoost)
	}
	b, err := m3.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if b[4] != encodingVersion {
		t.Fatalf("re-encoded as version %d, want %d", b[4], encodingVersion)
	}
	// Today's encoding adds the ridge float and the leaf_limit varint to the params
	// section and empty sections 8, 9 and 10: a tag and a zero length each.
	if len(b) != len(old)+9+2+2+2 {
		t.Errorf("re-encoded to %d bytes, want %d", len(b), len(old)+9+2+2+2)
	}
	m4, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, m3, m4)
	iris := readTable(t, "iris.csv")
	cols := iris.columns(m3)
	b3, r3 := encPredictions(t, m3, cols)
	b4, r4 := encPredictions(t, m4, cols)
	encSameFloats(t, "Predict", b3, b4)
	encSameFloats(t, "PredictRow", r3, r4)
	encSameFloats(t, "Predict against PredictRow", b3, r3)
}

// A model written in format version 4 (before the linear baseline) still decodes, scores
// as before, and re-encodes in today's version to the same model with no ridge and no
// linear record. testdata/models/iris-adaboost.v4.cpsm is the "iris-adaboost" fuzz seed
// as the version-4 encoder wrote it (copied before the encoder moved to version 5).
func TestDecodeVersion4(t *testing.T) {
	old, err := os.ReadFile("testdata/models/iris-adaboost.v4.cpsm")
	if err != nil {
		t.Fatal(err)
	}
	if old[4] != 4 {
		t.Fatalf("fixture is format version %d, want 4", old[4])
	}
	m4, err := Decode(old)
	if err != nil {
		t.Fatalf("decode version 4: %v", err)
	}
	if m4.AdaBoost == nil || m4.Linear != nil || m4.Params.Ridge != 0 {
		t.Fatalf("version 4 model: adaboost %v, linear %v, ridge %v", m4.AdaBoost != nil, m4.Linear != nil, m4.Params.Ridge)
	}
	b, err := m4.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if b[4] != encodingVersion {
		t.Fatalf("re-encoded as version %d, want %d", b[4], encodingVersion)
	}
	// Today's encoding adds the ridge float and the leaf_limit varint to the params
	// section and empty sections 9 and 10: a tag and a zero length each.
	if len(b) != len(old)+9+2+2 {
		t.Errorf("re-encoded to %d bytes, want %d", len(b), len(old)+9+2+2)
	}
	m5, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, m4, m5)
	iris := readTable(t, "iris.csv")
	cols := iris.columns(m4)
	b4, r4 := encPredictions(t, m4, cols)
	b5, r5 := encPredictions(t, m5, cols)
	encSameFloats(t, "Predict", b4, b5)
	encSameFloats(t, "PredictRow", r4, r5)
	encSameFloats(t, "Predict against PredictRow", b4, r4)
}

// A model written in format version 5 (before blends) still decodes, scores as before,
// and re-encodes in today's version to the same model with no blend record.
// testdata/models/mixed-linear.v5.cpsm is the "mixed-linear" fuzz seed as the version-5
// encoder wrote it (copied before the encoder moved to version 6).
func TestDecodeVersion5(t *testing.T) {
	old, err := os.ReadFile("testdata/models/mixed-linear.v5.cpsm")
	if err != nil {
		t.Fatal(err)
	}
	if old[4] != 5 {
		t.Fatalf("fixture is format version %d, want 5", old[4])
	}
	m5, err := Decode(old)
	if err != nil {
		t.Fatalf("decode version 5: %v", err)
	}
	if m5.Linear == nil || m5.Blend != nil {
		t.Fatalf("version 5 model: linear %v, blend %v", m5.Linear != nil, m5.Blend != nil)
	}
	b, err := m5.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if b[4] != encodingVersion {
		t.Fatalf("re-encoded as version %d, want %d", b[4], encodingVersion)
	}
	// Today's encoding adds the leaf_limit varint to the params section and an empty
	// section 10: its tag and a zero length.
	if len(b) != len(old)+1+2 {
		t.Errorf("re-encoded to %d bytes, want %d", len(b), len(old)+1+2)
	}
	m6, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, m5, m6)
	_, x := encMixedData(t, 60, true)
	b5, r5 := encPredictions(t, m5, x)
	b6, r6 := encPredictions(t, m6, x)
	encSameFloats(t, "Predict", b5, b6)
	encSameFloats(t, "PredictRow", r5, r6)
	encSameFloats(t, "Predict against PredictRow", b5, r5)
}

// A blend written in format version 6 (before learned weights) still decodes, with its
// members (themselves version 6), scores as before, and re-encodes in today's version to
// the same model with no fit record. testdata/models/mixed-blend.v6.cpsm is the
// "mixed-blend" fuzz seed as the version-6 encoder wrote it (copied before the encoder
// moved to version 7).
func TestDecodeVersion6(t *testing.T) {
	old, err := os.ReadFile("testdata/models/mixed-blend.v6.cpsm")
	if err != nil {
		t.Fatal(err)
	}
	if old[4] != 6 {
		t.Fatalf("fixture is format version %d, want 6", old[4])
	}
	m6, err := Decode(old)
	if err != nil {
		t.Fatalf("decode version 6: %v", err)
	}
	if m6.Blend == nil || m6.Blend.Fitted != nil || len(m6.Blend.Members) != 2 {
		t.Fatalf("version 6 model: blend %+v", m6.Blend)
	}
	b, err := m6.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if b[4] != encodingVersion {
		t.Fatalf("re-encoded as version %d, want %d", b[4], encodingVersion)
	}
	// Today's encoding adds the fitted byte (0) to section 10, whose length uvarint may
	// grow by a byte, and the leaf_limit varint to the params of the blend and of each
	// of its members (whose length prefixes may grow by a byte too).
	if limit := len(old) + 2 + 1 + 2*len(m6.Blend.Members); len(b) <= len(old) || len(b) > limit {
		t.Errorf("re-encoded to %d bytes from %d", len(b), len(old))
	}
	m7, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	encSameModel(t, m6, m7)
	_, x := encMixedData(t, 60, true)
	cols := make([][]float64, len(m6.Features))
	at := map[string]int{"x": 0, "flag": 1, "color": 2, "city": 3}
	for f, fi := range m6.Features {
		cols[f] = x[at[fi.Name]]
	}
	b6, r6 := encPredictions(t, m6, cols)
	b7, r7 := encPredictions(t, m7, cols)
	encSameFloats(t, "Predict", b6, b7)
	encSameFloats(t, "PredictRow", r6, r7)
	encSameFloats(t, "Predict against PredictRow", b6, r6)
}

// A model written in format version 7 (before best-first growth) decodes with no leaf
// limit, and today's encoding of it adds only the leaf_limit varint (one byte).
func TestDecodeVersion7(t *testing.T) {
	old, err := os.ReadFile("testdata/models/breast-cancer-boosting.v7.cpsm")
	if err != nil {
		t.Fatal(err)
	}
	if old[4] != 7 {
		t.Fatalf("fixture is format version %d, want 7", old[4])
	}
	m7, err := Decode(old)
	if err != nil {
		t.Fatalf("decode version 7: %v", err)
	}
	if m7.Params.LeafLimit != 0 || m7.Boost == nil {
		t.Fatalf("version 7 model: leaf limit %d, boost %v", m7.Params.LeafLimit, m7.Boost)
	}
	b, err := m7.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if b[4] != encodingVersion || len(b) != len(old)+1 {
		t.Fatalf("re-encoded as version %d in %d bytes, want version %d in %d", b[4], len(b), encodingVersion, len(old)+1)
	}
	cur, err := Decode(corpusBytes(t, "testdata/fuzz/FuzzDecode/seed-breast-cancer-boosting"))
	if err != nil {
		t.Fatal(err)
	}
	if diff := modelDiff(m7, cur); diff != "" {
		t.Errorf("the version-7 model differs from today's seed in %s", diff)
	}
}

package forest

// The binary model encoding, format version 7. It holds everything scoring and explaining
// need, so a model can be stored in a table cell and scored later without the data.
// Decode also reads version 1 (before boosting: no section 7, no boosting controls) and
// version 2 (no quantile control), version 3 (no section 8), version 4 (no section 9,
// no ridge control), version 5 (no section 10) and version 6 (no fit record in
// section 10), so models stored by earlier builds keep scoring.
//
//	offset  field     type
//	0       magic     4 bytes "CPSM"
//	4       version   uint16, 7
//	6       sections  the ten below, in tag order, each: tag byte, body length uvarint, body
//	end-4   checksum  uint32, CRC-32 (Castagnoli) of every byte before it
//
// Fixed-width numbers are little-endian; a float is its full 64-bit IEEE pattern, so NaN
// payloads and −0 survive. Counts, indices and other non-negative integers are uvarints
// and signed integers zig-zag varints (encoding/binary), always in their shortest form.
// A string is a uvarint byte count and the bytes. A list is a uvarint n+1 and its n
// elements, or 0 for a nil list, so nil and empty slices stay apart. Every valid model has
// exactly one encoding: Decode refuses any other form, so decode → encode gives back the
// same bytes.
//
//	tag  section     fields, in order
//	1    model       method string, task string, target string, rows uvarint,
//	                 classes list of string
//	2    params      method string, task string, impurity string, trees varint,
//	                 max_depth varint, min_leaf float, min_gain float,
//	                 features_per_split float, row_fraction float, with_replacement byte
//	                 (0 or 1), bins varint, seed uvarint, permutation_rows varint,
//	                 loss string, learning_rate float, leaf_penalty float,
//	                 holdout_fraction float, patience varint, quantile float and
//	                 exposure string (since 3), ridge float (since 5), leaf_limit
//	                 varint (since 8)
//	3    features    count uvarint, then per feature: name string, kind byte (1 numeric,
//	                 2 categorical), levels list of string, bin upper edges list of float,
//	                 level bins list of uint16, bin counts list of float
//	4    trees       count uvarint, then per tree: node count uvarint, level sets list of
//	                 (list of uint64), then per node:
//	                   flags byte: 1 missing values go left, 2 threshold follows,
//	                     4 gain follows; other bits 0
//	                   left uvarint: 0 on a leaf, else left child index − node index
//	                   feature uvarint
//	                   level set uvarint: 0 for none, else index + 1
//	                   threshold float (when flagged; else +0)
//	                   gain float (when flagged; else +0)
//	                   cover float
//	                   value: width floats
//	5    oob         empty when there is none; else votes list of uvarint, value list of
//	                 float, metrics list of (name string, value float), curve list of
//	                 float, curve metric string, scored uvarint
//	6    importance  impurity, permutation, permutation std: three lists of float
//	7    boost       empty when the model is not boosted; else loss string, initial
//	                 score list of float, rounds uvarint, best round uvarint, training
//	                 loss list of float, holdout loss list of float (multinomial: one
//	                 initial score per class, and the trees round-major, tree t adding
//	                 to class t mod K)
//	8    adaboost    empty when the model is not AdaBoost; else α list of float and
//	                 error list of float, one each per tree (since 4)
//	9    linear      empty when the model is not linear; else iterations uvarint, term
//	                 count uvarint, then per term: name string, kind byte (0 intercept,
//	                 1 value, 2 level, 3 numeric missing, 4 categorical missing), feature uvarint, level uvarint, fill
//	                 float, estimate float, std error float, z float, p-value float
//	                 (since 5)
//	10   blend       empty when the model is not a blend; else rule string, member
//	                 names list of string, weights list of float, member count uvarint,
//	                 then per member its whole encoding (the blend's version, never
//	                 itself a blend) as a string (since 6); then a fitted byte (0: weights
//	                 given; 1: learned, and metric string, rows uvarint, loss float,
//	                 member losses list of float follow) (since 7)
//
// A tree's width (the number of classes, or 1 for boosted and regression trees) and each
// binning's kind are implied, not
// stored. Child links are stored as forward distances, so the bytes cannot express a link
// to an earlier node, and with it a cycle.

import (
	"encoding"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"math"
)

const (
	encodingMagic   = "CPSM"
	encodingVersion = 8
	encodingHead    = len(encodingMagic) + 2 // magic and version
	encodingSum     = 4                      // checksum
)

// Node flags.
const (
	nodeDefaultLeft = 1 << iota
	nodeThreshold
	nodeGain
	nodeFlags = nodeDefaultLeft | nodeThreshold | nodeGain
)

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// ErrCorrupt is wrapped by every error of Decode: the bytes are damaged, truncated, not a
// model, or from a format version this build does not read.
var ErrCorrupt = errors.New("forest: corrupt model encoding")

// decodeError carries the reason a decode failed and wraps ErrCorrupt beside it.
type decodeError struct{ err error }

func (e *decodeError) Error() string   { return "forest: decode: " + e.err.Error() }
func (e *decodeError) Unwrap() []error { return []error{ErrCorrupt, e.err} }

var (
	_ encoding.BinaryMarshaler   = (*Model)(nil)
	_ encoding.BinaryUnmarshaler = (*Model)(nil)
)

// section is one part of the encoding, written and read by the functions beside it.
type section struct {
	tag   byte
	name  string
	since uint16 // the first format version that has the section
	write func(*encWriter, *Model)
	read  func(*encReader, *Model)
}

// sections is filled in by init: a blend's section encodes and decodes whole models.
var sections [10]section

func init() {
	sections = [...]section{
		{1, "model", 1, (*encWriter).model, (*encReader).model},
		{2, "params", 1, (*encWriter).params, (*encReader).params},
		{3, "features", 1, (*encWriter).features, (*encReader).features},
		{4, "trees", 1, (*encWriter).trees, (*encReader).trees},
		{5, "oob", 1, (*encWriter).oob, (*encReader).oob},
		{6, "importance", 1, (*encWriter).importance, (*encReader).importance},
		{7, "boost", 2, (*encWriter).boost, (*encReader).boost},
		{8, "adaboost", 4, (*encWriter).adaboost, (*encReader).adaboost},
		{9, "linear", 5, (*encWriter).linear, (*encReader).linear},
		{10, "blend", 6, (*encWriter).blend, (*encReader).blend},
	}
}

// MarshalBinary encodes the model in the layout described at the top of this file. It
// first checks the model as Decode would, so it never writes bytes Decode refuses.
func (m *Model) MarshalBinary() ([]byte, error) {
	if err := m.checkStructure(); err != nil {
		return nil, fmt.Errorf("forest: encode: %w", err)
	}
	return m.encode(), nil
}

// UnmarshalBinary replaces m with the model decoded from b; see Decode.
func (m *Model) UnmarshalBinary(b []byte) error {
	d, err := Decode(b)
	if err != nil {
		return err
	}
	*m = *d
	return nil
}

// encode writes m without checking it, so tests can also write broken models.
func (m *Model) encode() []byte {
	b := append(make([]byte, 0, 1024), encodingMagic...)
	b = binary.LittleEndian.AppendUint16(b, encodingVersion)
	var w encWriter
	for _, s := range sections {
		w.b = w.b[:0]
		s.write(&w, m)
		b = append(b, s.tag)
		b = binary.AppendUvarint(b, uint64(len(w.b)))
		b = append(b, w.b...)
	}
	return binary.LittleEndian.AppendUint32(b, crc32.Checksum(b, castagnoli))
}

// Decode reads a model written by MarshalBinary. The bytes may be untrusted: every error
// wraps ErrCorrupt, allocation stays proportional to len(b), and a model it returns has
// passed the checks that keep Predict in range and its tree walks finite. It does not
// keep b.
func Decode(b []byte) (*Model, error) {
	m, err := decode(b)
	if err != nil {
		return nil, &decodeError{err}
	}
	return m, nil
}

func decode(b []byte) (*Model, error) {
	if len(b) < encodingHead+encodingSum {
		return nil, fmt.Errorf("%d bytes are too few for a model", len(b))
	}
	if string(b[:len(encodingMagic)]) != encodingMagic {
		return nil, fmt.Errorf("not a model: starts with %q, want %q", b[:len(encodingMagic)], encodingMagic)
	}
	v := binary.LittleEndian.Uint16(b[len(encodingMagic):])
	if v < 1 || v > encodingVersion {
		return nil, fmt.Errorf("format version %d; this build reads versions 1 to %d", v, encodingVersion)
	}
	end := len(b) - encodingSum
	if got, want := crc32.Checksum(b[:end], castagnoli), binary.LittleEndian.Uint32(b[end:]); got != want {
		return nil, fmt.Errorf("checksum %08x, want %08x: the bytes are damaged or truncated", got, want)
	}
	m := new(Model)
	r := encReader{b: b[encodingHead:end], version: v}
	for _, s := range sections {
		if s.since > v {
			continue // an older model, written before this section existed
		}
		tag := r.u8("section tag")
		if r.err == nil && tag != s.tag {
			return nil, fmt.Errorf("section tag %d where %d (%s) belongs", tag, s.tag, s.name)
		}
		n := r.count("section length", 1)
		if r.err != nil {
			return nil, fmt.Errorf("section %s: %w", s.name, r.err)
		}
		sub := encReader{b: r.b[r.off : r.off+n], version: v}
		r.off += n
		s.read(&sub, m)
		if sub.err == nil && sub.off != len(sub.b) {
			sub.err = fmt.Errorf("%d bytes left over", len(sub.b)-sub.off)
		}
		if sub.err != nil {
			return nil, fmt.Errorf("section %s: %w", s.name, sub.err)
		}
	}
	if r.off != len(r.b) {
		return nil, fmt.Errorf("%d bytes after the last section", len(r.b)-r.off)
	}
	if err := m.checkStructure(); err != nil {
		return nil, err
	}
	if m.Blend != nil {
		m.Blend.prepare(m)
	}
	return m, nil
}

// encWriter appends encoded fields.
type encWriter struct{ b []byte }

func (w *encWriter) uvarint(v uint64) { w.b = binary.AppendUvarint(w.b, v) }
func (w *encWriter) varint(v int64)   { w.b = binary.AppendVarint(w.b, v) }
func (w *encWriter) u8(v byte)        { w.b = append(w.b, v) }
func (w *encWriter) u64(v uint64)     { w.b = binary.LittleEndian.AppendUint64(w.b, v) }
func (w *encWriter) float(v float64)  { w.u64(math.Float64bits(v)) }

func (w *encWriter) bool(v bool) {
	if v {
		w.u8(1)
	} else {
		w.u8(0)
	}
}

func (w *encWriter) str(s string) {
	w.uvarint(uint64(len(s)))
	w.b = append(w.b, s...)
}

// list writes a list's length prefix: 0 for nil, else n+1.
func (w *encWriter) list(n int, isNil bool) {
	if isNil {
		w.uvarint(0)
	} else {
		w.uvarint(uint64(n) + 1)
	}
}

func (w *encWriter) floats(v []float64) {
	w.list(len(v), v == nil)
	for _, x := range v {
		w.float(x)
	}
}

func (w *encWriter) strs(v []string) {
	w.list(len(v), v == nil)
	for _, s := range v {
		w.str(s)
	}
}

func (w *encWriter) model(m *Model) {
	w.str(string(m.Method))
	w.str(string(m.Task))
	w.str(m.Target)
	w.uvarint(uint64(m.Rows))
	w.strs(m.Classes)
}

func (w *encWriter) params(m *Model) {
	p := &m.Params
	w.str(string(p.Method))
	w.str(string(p.Task))
	w.str(string(p.Impurity))
	w.varint(int64(p.Trees))
	w.varint(int64(p.MaxDepth))
	w.float(p.MinLeaf)
	w.float(p.MinGain)
	w.float(p.FeaturesPerSplit)
	w.float(p.RowFraction)
	w.bool(p.WithReplacement)
	w.varint(int64(p.Bins))
	w.uvarint(p.Seed)
	w.varint(int64(p.PermutationRows))
	w.str(string(p.Loss))
	w.float(p.LearningRate)
	w.float(p.LeafPenalty)
	w.float(p.HoldoutFraction)
	w.varint(int64(p.Patience))
	w.float(p.Quantile)
	w.str(p.Exposure)
	w.float(p.Ridge)
	w.varint(int64(p.LeafLimit))
}

func (w *encWriter) features(m *Model) {
	w.uvarint(uint64(len(m.Features)))
	for i := range m.Features {
		f := &m.Features[i]
		w.str(f.Name)
		w.u8(byte(f.Kind))
		w.strs(f.Levels)
		w.floats(f.Binning.Upper)
		w.list(len(f.Binning.LevelBin), f.Binning.LevelBin == nil)
		for _, v := range f.Binning.LevelBin {
			w.b = binary.LittleEndian.AppendUint16(w.b, v)
		}
		w.floats(f.Binning.Counts)
	}
}

func (w *encWriter) trees(m *Model) {
	W := m.treeWidth()
	w.uvarint(uint64(len(m.Trees)))
	for _, t := range m.Trees {
		w.uvarint(uint64(len(t.Nodes)))
		w.list(len(t.LevelSets), t.LevelSets == nil)
		for _, set := range t.LevelSets {
			w.list(len(set), set == nil)
			for _, word := range set {
				w.u64(word)
			}
		}
		for i := range t.Nodes {
			n := &t.Nodes[i]
			var flags byte
			if n.DefaultLeft {
				flags |= nodeDefaultLeft
			}
			if math.Float64bits(n.Threshold) != 0 {
				flags |= nodeThreshold
			}
			if math.Float64bits(t.Gain[i]) != 0 {
				flags |= nodeGain
			}
			w.u8(flags)
			if n.Left == -1 {
				w.uvarint(0)
			} else {
				w.uvarint(uint64(int64(n.Left) - int64(i)))
			}
			w.uvarint(uint64(int64(n.Feature)))
			w.uvarint(uint64(int64(n.LevelSet) + 1))
			if flags&nodeThreshold != 0 {
				w.float(n.Threshold)
			}
			if flags&nodeGain != 0 {
				w.float(t.Gain[i])
			}
			w.float(t.Cover[i])
			for _, v := range t.Value[i*W : (i+1)*W] {
				w.float(v)
			}
		}
	}
}

func (w *encWriter) oob(m *Model) {
	o := m.OOB
	if o == nil {
		return
	}
	w.list(len(o.Votes), o.Votes == nil)
	for _, v := range o.Votes {
		w.uvarint(uint64(int64(v)))
	}
	w.floats(o.Value)
	w.list(len(o.Metrics), o.Metrics == nil)
	for _, mt := range o.Metrics {
		w.str(mt.Name)
		w.float(mt.Value)
	}
	w.floats(o.Curve)
	w.str(o.CurveMetric)
	w.uvarint(uint64(o.Scored))
}

func (w *encWriter) importance(m *Model) {
	w.floats(m.Importance.Impurity)
	w.floats(m.Importance.Permutation)
	w.floats(m.Importance.PermutationStd)
}

func (w *encWriter) boost(m *Model) {
	b := m.Boost
	if b == nil {
		return
	}
	w.str(string(b.Loss))
	w.floats(b.InitScore)
	w.uvarint(uint64(b.Rounds))
	w.uvarint(uint64(b.BestRound))
	w.floats(b.TrainLoss)
	w.floats(b.HoldoutLoss)
}

func (w *encWriter) adaboost(m *Model) {
	if a := m.AdaBoost; a != nil {
		w.floats(a.Alpha)
		w.floats(a.Error)
	}
}

func (w *encWriter) linear(m *Model) {
	l := m.Linear
	if l == nil {
		return
	}
	w.uvarint(uint64(l.Iterations))
	w.uvarint(uint64(len(l.Terms)))
	for _, t := range l.Terms {
		w.str(t.Name)
		w.u8(byte(t.Kind))
		w.uvarint(uint64(t.Feature))
		w.uvarint(uint64(t.Level))
		w.float(t.Fill)
		w.float(t.Estimate)
		w.float(t.StdError)
		w.float(t.Z)
		w.float(t.PValue)
	}
}

func (w *encWriter) blend(m *Model) {
	b := m.Blend
	if b == nil {
		return
	}
	w.str(string(b.Rule))
	w.strs(b.Names)
	w.floats(b.Weights)
	w.uvarint(uint64(len(b.Members)))
	for _, mem := range b.Members {
		w.str(string(mem.encode()))
	}
	if f := b.Fitted; f == nil {
		w.u8(0)
	} else {
		w.u8(1)
		w.str(f.Metric)
		w.uvarint(uint64(f.Rows))
		w.float(f.Loss)
		w.floats(f.MemberLoss)
	}
}

// encReader reads encoded fields from untrusted bytes. The first error sticks: later reads
// return zero values and consume nothing, so a caller checks err once after a group of
// reads, and a count read after an error is 0, which keeps loops and allocations empty.
type encReader struct {
	b       []byte
	off     int
	err     error
	version uint16 // the format version being read: models of version 1 stay readable
}

func (r *encReader) fail(format string, args ...any) {
	if r.err == nil {
		r.err = fmt.Errorf(format, args...)
	}
}

func (r *encReader) remaining() int { return len(r.b) - r.off }

func (r *encReader) uvarint(what string) uint64 {
	if r.err != nil {
		return 0
	}
	v, n := binary.Uvarint(r.b[r.off:])
	switch {
	case n == 0:
		r.fail("%s: unexpected end of data", what)
		return 0
	case n < 0:
		r.fail("%s: varint overflows 64 bits", what)
		return 0
	case n > 1 && r.b[r.off+n-1] == 0:
		r.fail("%s: varint not in its shortest form", what)
		return 0
	}
	r.off += n
	return v
}

// signed reads a zig-zag varint that must fit an int.
func (r *encReader) signed(what string) int {
	u := r.uvarint(what)
	v := int64(u >> 1)
	if u&1 != 0 {
		v = ^v
	}
	if int64(int(v)) != v {
		r.fail("%s: %d does not fit an int", what, v)
		return 0
	}
	return int(v)
}

// bounded reads a uvarint that must be at most limit.
func (r *encReader) bounded(what string, limit uint64) uint64 {
	v := r.uvarint(what)
	if v > limit {
		r.fail("%s: %d is above %d", what, v, limit)
		return 0
	}
	return v
}

func (r *encReader) u8(what string) byte {
	if r.err != nil {
		return 0
	}
	if r.remaining() < 1 {
		r.fail("%s: unexpected end of data", what)
		return 0
	}
	r.off++
	return r.b[r.off-1]
}

func (r *encReader) bool(what string) bool {
	switch v := r.u8(what); v {
	case 0:
		return false
	case 1:
		return true
	default:
		r.fail("%s: byte %d, want 0 or 1", what, v)
		return false
	}
}

func (r *encReader) u64(what string) uint64 {
	if r.err != nil {
		return 0
	}
	if r.remaining() < 8 {
		r.fail("%s: unexpected end of data", what)
		return 0
	}
	r.off += 8
	return binary.LittleEndian.Uint64(r.b[r.off-8:])
}

func (r *encReader) float(what string) float64 { return math.Float64frombits(r.u64(what)) }

// count reads a number of elements of at least minSize bytes each and refuses more than
// the remaining bytes can hold, before anything is allocated for them.
func (r *encReader) count(what string, minSize int) int {
	v := r.uvarint(what)
	if r.err == nil && v > uint64(r.remaining()/minSize) {
		r.fail("%s: %d elements of %d or more bytes, but %d bytes remain", what, v, minSize, r.remaining())
		return 0
	}
	return int(v)
}

// list reads a list's length prefix (0 for nil, else n+1), checked as by count.
func (r *encReader) list(what string, minSize int) (n int, isNil bool) {
	v := r.uvarint(what)
	if r.err != nil || v == 0 {
		return 0, true
	}
	if v-1 > uint64(r.remaining()/minSize) {
		r.fail("%s: %d elements of %d or more bytes, but %d bytes remain", what, v-1, minSize, r.remaining())
		return 0, true
	}
	return int(v - 1), false
}

func (r *encReader) str(what string) string {
	n := r.count(what, 1)
	if r.err != nil {
		return ""
	}
	r.off += n
	return string(r.b[r.off-n : r.off])
}

func (r *encReader) floats(what string) []float64 {
	n, isNil := r.list(what, 8)
	if isNil {
		return nil
	}
	v := make([]float64, n)
	for i := range v {
		v[i] = r.float(what)
	}
	return v
}

func (r *encReader) strs(what string) []string {
	n, isNil := r.list(what, 1)
	if isNil {
		return nil
	}
	v := make([]string, n)
	for i := range v {
		v[i] = r.str(what)
	}
	return v
}

func (r *encReader) model(m *Model) {
	m.Method = Method(r.str("method"))
	m.Task = Task(r.str("task"))
	m.Target = r.str("target")
	m.Rows = int(r.bounded("rows", math.MaxInt))
	m.Classes = r.strs("classes")
}

func (r *encReader) params(m *Model) {
	p := &m.Params
	p.Method = Method(r.str("method"))
	p.Task = Task(r.str("task"))
	p.Impurity = Impurity(r.str("impurity"))
	p.Trees = r.signed("trees")
	p.MaxDepth = r.signed("max_depth")
	p.MinLeaf = r.float("min_leaf")
	p.MinGain = r.float("min_gain")
	p.FeaturesPerSplit = r.float("features_per_split")
	p.RowFraction = r.float("row_fraction")
	p.WithReplacement = r.bool("with_replacement")
	p.Bins = r.signed("bins")
	p.Seed = r.uvarint("seed")
	p.PermutationRows = r.signed("permutation_rows")
	if r.version < 2 {
		return // version 1 predates boosting: its controls keep their zero values
	}
	p.Loss = Loss(r.str("loss"))
	p.LearningRate = r.float("learning_rate")
	p.LeafPenalty = r.float("leaf_penalty")
	p.HoldoutFraction = r.float("holdout_fraction")
	p.Patience = r.signed("patience")
	if r.version < 3 {
		return // version 2 predates the quantile loss
	}
	p.Quantile = r.float("quantile")
	p.Exposure = r.str("exposure")
	if r.version < 5 {
		return // version 4 predates the linear baseline
	}
	p.Ridge = r.float("ridge")
	if r.version < 8 {
		return // version 7 predates best-first growth
	}
	p.LeafLimit = r.signed("leaf_limit")
}

func (r *encReader) features(m *Model) {
	// The least a feature takes: name, kind and four list prefixes.
	n := r.count("feature count", 6)
	if r.err != nil {
		return
	}
	m.Features = make([]FeatureInfo, n)
	for i := range m.Features {
		f := &m.Features[i]
		f.Name = r.str("name")
		f.Kind = Kind(r.u8("kind"))
		f.Binning.Kind = f.Kind
		f.Levels = r.strs("levels")
		f.Binning.Upper = r.floats("bin edges")
		if k, isNil := r.list("level bins", 2); !isNil {
			f.Binning.LevelBin = make([]uint16, k)
			for j := range f.Binning.LevelBin {
				if r.remaining() < 2 {
					r.fail("level bins: unexpected end of data")
					break
				}
				f.Binning.LevelBin[j] = binary.LittleEndian.Uint16(r.b[r.off:])
				r.off += 2
			}
		}
		f.Binning.Counts = r.floats("bin counts")
		if r.err != nil {
			r.err = fmt.Errorf("feature %d: %w", i, r.err)
			return
		}
	}
}

func (r *encReader) trees(m *Model) {
	W := m.treeWidth()
	if W > math.MaxUint16 {
		r.fail("%d classes; at most %d are supported", W, math.MaxUint16)
		return
	}
	minNode := 4 + 8 + 8*W // flags, left, feature, level set, cover, value
	n := r.count("tree count", 2+minNode)
	if r.err != nil || n == 0 {
		return // a linear model has no trees (nil, as Train leaves them)
	}
	m.Trees = make([]*Tree, n)
	for b := range m.Trees {
		t, err := r.tree(W, minNode)
		if err != nil {
			r.err = fmt.Errorf("tree %d: %w", b, err)
			return
		}
		m.Trees[b] = t
	}
}

func (r *encReader) tree(W, minNode int) (*Tree, error) {
	t := &Tree{Width: W}
	N := r.count("node count", minNode)
	if r.err == nil && N > math.MaxInt32 {
		r.fail("%d nodes; at most %d fit", N, math.MaxInt32)
	}
	if k, isNil := r.list("level sets", 1); !isNil {
		t.LevelSets = make([][]uint64, k)
		for s := range t.LevelSets {
			if words, isNil := r.list("level set", 8); !isNil {
				set := make([]uint64, words)
				for j := range set {
					set[j] = r.u64("level set")
				}
				t.LevelSets[s] = set
			}
		}
	}
	if r.err != nil {
		return nil, r.err
	}
	t.Nodes = make([]Node, N)
	t.Gain = make([]float64, N)
	t.Cover = make([]float64, N)
	t.Value = make([]float64, N*W)
	for i := range t.Nodes {
		n := &t.Nodes[i]
		flags := r.u8("node flags")
		if flags&^nodeFlags != 0 {
			r.fail("node %d: unknown flags %#x", i, flags&^nodeFlags)
		}
		n.DefaultLeft = flags&nodeDefaultLeft != 0
		// Bounding the distance keeps Left within int32; checkStructure checks the right
		// child too.
		n.Left = -1
		if d := r.bounded("left child", uint64(N-i-1)); d > 0 {
			n.Left = int32(i + int(d))
		}
		n.Feature = int32(r.bounded("feature", math.MaxInt32))
		n.LevelSet = int32(r.bounded("level set", math.MaxInt32)) - 1
		if flags&nodeThreshold != 0 {
			if n.Threshold = r.float("threshold"); r.err == nil && math.Float64bits(n.Threshold) == 0 {
				r.fail("node %d: threshold flagged but +0", i)
			}
		}
		if flags&nodeGain != 0 {
			if t.Gain[i] = r.float("gain"); r.err == nil && math.Float64bits(t.Gain[i]) == 0 {
				r.fail("node %d: gain flagged but +0", i)
			}
		}
		t.Cover[i] = r.float("cover")
		for k := range W {
			t.Value[i*W+k] = r.float("value")
		}
		if r.err != nil {
			return nil, r.err
		}
	}
	return t, nil
}

func (r *encReader) oob(m *Model) {
	if len(r.b) == 0 {
		return // no out-of-bag results
	}
	o := new(OOB)
	if n, isNil := r.list("votes", 1); !isNil {
		o.Votes = make([]int32, n)
		for i := range o.Votes {
			o.Votes[i] = int32(r.bounded("votes", math.MaxInt32))
		}
	}
	o.Value = r.floats("value")
	if n, isNil := r.list("metrics", 9); !isNil {
		o.Metrics = make([]Metric, n)
		for i := range o.Metrics {
			o.Metrics[i] = Metric{r.str("metric name"), r.float("metric value")}
		}
	}
	o.Curve = r.floats("curve")
	o.CurveMetric = r.str("curve metric")
	o.Scored = int(r.bounded("scored", math.MaxInt))
	m.OOB = o
}

func (r *encReader) importance(m *Model) {
	m.Importance.Impurity = r.floats("impurity")
	m.Importance.Permutation = r.floats("permutation")
	m.Importance.PermutationStd = r.floats("permutation std")
}

func (r *encReader) boost(m *Model) {
	if len(r.b) == 0 {
		return // not boosted
	}
	b := new(Boost)
	b.Loss = Loss(r.str("loss"))
	b.InitScore = r.floats("initial score")
	b.Rounds = int(r.bounded("rounds", math.MaxInt32))
	b.BestRound = int(r.bounded("best round", math.MaxInt32))
	b.TrainLoss = r.floats("training loss")
	b.HoldoutLoss = r.floats("holdout loss")
	m.Boost = b
}

func (r *encReader) adaboost(m *Model) {
	if len(r.b) == 0 {
		return // not AdaBoost
	}
	m.AdaBoost = &AdaBoost{Alpha: r.floats("alpha"), Error: r.floats("error")}
}

func (r *encReader) linear(m *Model) {
	if len(r.b) == 0 {
		return // not linear
	}
	l := &Linear{Iterations: int(r.bounded("iterations", math.MaxInt32))}
	// A term takes at least a name length, kind, feature, level and five floats.
	n := r.count("terms", 4+5*8)
	l.Terms = make([]Term, n)
	for j := range l.Terms {
		t := &l.Terms[j]
		t.Name = r.str("term name")
		t.Kind = TermKind(r.u8("term kind"))
		t.Feature = int(r.bounded("term feature", math.MaxInt32))
		t.Level = int(r.bounded("term level", math.MaxInt32))
		t.Fill = r.float("fill")
		t.Estimate = r.float("estimate")
		t.StdError = r.float("std error")
		t.Z = r.float("z")
		t.PValue = r.float("p-value")
	}
	m.Linear = l
}

func (r *encReader) blend(m *Model) {
	if len(r.b) == 0 {
		return // not a blend
	}
	b := &Blend{Rule: BlendRule(r.str("rule")), Names: r.strs("member names"), Weights: r.floats("weights")}
	// A member's encoding takes at least its length, head and checksum.
	n := r.count("members", 1+encodingHead+encodingSum)
	b.Members = make([]*Model, n)
	for j := range b.Members {
		enc := r.str("member")
		if r.err != nil {
			break
		}
		if len(enc) >= encodingHead && binary.LittleEndian.Uint16([]byte(enc[len(encodingMagic):])) != r.version {
			r.fail("member %d: format version %d inside a version %d blend", j, binary.LittleEndian.Uint16([]byte(enc[len(encodingMagic):])), r.version)
			break
		}
		mem, err := decode([]byte(enc))
		if err != nil {
			r.fail("member %d: %v", j, err)
			break
		}
		b.Members[j] = mem
	}
	if r.version >= 7 {
		switch fitted := r.u8("fitted"); fitted {
		case 0:
		case 1:
			b.Fitted = &FittedOn{Metric: r.str("fit metric"), Rows: int(r.bounded("fit rows", math.MaxInt)), Loss: r.float("fit loss"),
				MemberLoss: r.floats("member losses")}
		default:
			r.fail("fitted byte %d, want 0 or 1", fitted)
		}
	}
	m.Blend = b
}

// checkAdaBoost checks that a model has votes exactly when its method says so, one
// finite α > 0 and one error in [0, 1 − 1/K) per tree.
func (m *Model) checkAdaBoost() error {
	a := m.AdaBoost
	if (m.Method == MethodAdaBoost) != (a != nil) {
		return fmt.Errorf("method %q with AdaBoost record %v", m.Method, a != nil)
	}
	if a == nil {
		return nil
	}
	if m.Task != Classification || m.OOB != nil || m.Boost != nil {
		return fmt.Errorf("AdaBoost for %s, with out-of-bag results %v, boosting record %v", m.Task, m.OOB != nil, m.Boost != nil)
	}
	if len(a.Alpha) != len(m.Trees) || len(a.Error) != len(m.Trees) {
		return fmt.Errorf("%d α and %d errors for %d trees", len(a.Alpha), len(a.Error), len(m.Trees))
	}
	chance := 1 - 1/float64(len(m.Classes))
	for t, v := range a.Alpha {
		if !(v > 0) || math.IsInf(v, 0) {
			return fmt.Errorf("tree %d: α %v; want a finite number above 0", t, v)
		}
		if e := a.Error[t]; !(e >= 0 && e < chance) {
			return fmt.Errorf("tree %d: error %v; want [0, %v)", t, e, chance)
		}
	}
	return nil
}

// checkStructure checks what Predict and the explaining code index by, so that a model
// that passes can score any row without a panic or an endless loop. Decode runs it on
// untrusted bytes; MarshalBinary runs it so that it never writes what Decode refuses.
func (m *Model) checkStructure() error {
	switch m.Method {
	case MethodTree, MethodBagging, MethodForest, MethodBoosting, MethodAdaBoost, MethodLinear, MethodBlend:
	default:
		return fmt.Errorf("unknown method %q", m.Method)
	}
	if err := m.checkBoost(); err != nil {
		return err
	}
	switch m.Task {
	case Classification:
		if len(m.Classes) < 2 || len(m.Classes) > math.MaxUint16 {
			return fmt.Errorf("classification with %d classes; want 2 to %d", len(m.Classes), math.MaxUint16)
		}
	case Regression:
		if len(m.Classes) != 0 {
			return fmt.Errorf("regression with %d classes; want none", len(m.Classes))
		}
	default:
		return fmt.Errorf("unknown task %q", m.Task)
	}
	if err := m.checkAdaBoost(); err != nil {
		return err
	}
	if m.Params.Method != m.Method || m.Params.Task != m.Task {
		return fmt.Errorf("params say %s %s, the model is %s %s", m.Params.Method, m.Params.Task, m.Method, m.Task)
	}
	switch m.Params.Impurity {
	case "", Gini, Entropy:
	default:
		return fmt.Errorf("unknown impurity %q", m.Params.Impurity)
	}
	if m.Rows < 0 {
		return fmt.Errorf("%d training rows", m.Rows)
	}
	F := len(m.Features)
	if F == 0 || F > math.MaxInt32 {
		return fmt.Errorf("%d features; want 1 to %d", F, math.MaxInt32)
	}
	names := make(map[string]bool, F)
	for i := range m.Features {
		f := &m.Features[i]
		if err := f.checkStructure(); err != nil {
			return fmt.Errorf("feature %d (%q): %w", i, f.Name, err)
		}
		if f.Name == "" || names[f.Name] {
			return fmt.Errorf("feature %d: name %q is empty or repeated", i, f.Name)
		}
		names[f.Name] = true
	}
	if err := m.checkLinear(); err != nil {
		return err
	}
	if err := m.checkBlend(); err != nil {
		return err
	}
	if len(m.Trees) == 0 && m.Linear == nil && m.Blend == nil {
		return errors.New("no trees")
	}
	for b, t := range m.Trees {
		if err := t.checkStructure(m.treeWidth(), m.Features); err != nil {
			return fmt.Errorf("tree %d: %w", b, err)
		}
	}
	W := m.Width()
	if o := m.OOB; o != nil {
		if len(o.Votes) != m.Rows {
			return fmt.Errorf("oob: %d votes for %d rows", len(o.Votes), m.Rows)
		}
		for i, v := range o.Votes {
			if v < 0 || int(v) > len(m.Trees) {
				return fmt.Errorf("oob: row %d has %d votes from %d trees", i, v, len(m.Trees))
			}
		}
		if len(o.Value) != m.Rows*W {
			return fmt.Errorf("oob: %d values for %d rows of width %d", len(o.Value), m.Rows, W)
		}
		if len(o.Curve) != len(m.Trees) {
			return fmt.Errorf("oob: curve of %d points for %d trees", len(o.Curve), len(m.Trees))
		}
		if o.Scored < 0 || o.Scored > m.Rows {
			return fmt.Errorf("oob: %d rows scored of %d", o.Scored, m.Rows)
		}
	}
	for _, imp := range []struct {
		name string
		v    []float64
	}{
		{"impurity", m.Importance.Impurity},
		{"permutation", m.Importance.Permutation},
		{"permutation std", m.Importance.PermutationStd},
	} {
		if imp.v != nil && len(imp.v) != F {
			return fmt.Errorf("%s importance: %d values for %d features", imp.name, len(imp.v), F)
		}
	}
	return nil
}

// checkBoost checks that a model is boosted exactly when its method says so, and that
// its boosting record fits the trees and the link.
func (m *Model) checkBoost() error {
	b := m.Boost
	if (m.Method == MethodBoosting) != (b != nil) {
		return fmt.Errorf("method %q with boosting record %v", m.Method, b != nil)
	}
	if b == nil {
		if m.Params.Quantile != 0 || m.Params.Exposure != "" {
			return fmt.Errorf("quantile %v, exposure %q without boosting", m.Params.Quantile, m.Params.Exposure)
		}
		return nil
	}
	if m.OOB != nil {
		return errors.New("a boosted model with out-of-bag results")
	}
	switch {
	case regressionLoss(b.Loss) && m.Task == Regression:
	case b.Loss == LossLogistic && m.Task == Classification && len(m.Classes) == 2:
	case b.Loss == LossMultinomial && m.Task == Classification && len(m.Classes) >= 3:
	default:
		return fmt.Errorf("loss %q for %s with %d classes", b.Loss, m.Task, len(m.Classes))
	}
	if q := m.Params.Quantile; (b.Loss == LossQuantile) != (q > 0 && q < 1) || (b.Loss != LossQuantile && q != 0) {
		return fmt.Errorf("quantile %v with loss %q", q, b.Loss)
	}
	if e := m.Params.Exposure; e != "" {
		if b.Loss != LossPoisson {
			return fmt.Errorf("exposure %q with loss %q", e, b.Loss)
		}
		for i := range m.Features {
			if m.Features[i].Name == e {
				return fmt.Errorf("exposure %q is also feature %d", e, i)
			}
		}
	}
	if m.Params.Loss != b.Loss {
		return fmt.Errorf("params say loss %q, the model has %q", m.Params.Loss, b.Loss)
	}
	// Multinomial trees are round-major, tree t adding to class t mod K, so K initial
	// scores and K trees per kept round fix every tree's output.
	K := 1
	if b.Loss == LossMultinomial {
		K = len(m.Classes)
	}
	if len(b.InitScore) != K {
		return fmt.Errorf("%d initial scores; want %d", len(b.InitScore), K)
	}
	if b.BestRound < 1 || b.BestRound > b.Rounds || b.BestRound*K != len(m.Trees) {
		return fmt.Errorf("best round %d of %d rounds with %d trees, %d per round", b.BestRound, b.Rounds, len(m.Trees), K)
	}
	if len(b.TrainLoss) != b.Rounds || (b.HoldoutLoss != nil && len(b.HoldoutLoss) != b.Rounds) {
		return fmt.Errorf("%d training and %d holdout losses for %d rounds", len(b.TrainLoss), len(b.HoldoutLoss), b.Rounds)
	}
	return nil
}

func (f *FeatureInfo) checkStructure() error {
	b := &f.Binning
	if b.Kind != f.Kind {
		return fmt.Errorf("binning kind %v, feature kind %v", b.Kind, f.Kind)
	}
	switch f.Kind {
	case Numeric:
		if len(f.Levels) != 0 || len(b.LevelBin) != 0 {
			return fmt.Errorf("numeric feature with %d levels and %d level bins", len(f.Levels), len(b.LevelBin))
		}
		if len(b.Upper) == 0 {
			return errors.New("no bin edges")
		}
		for i, u := range b.Upper {
			if u != u || i > 0 && !(u > b.Upper[i-1]) {
				return fmt.Errorf("bin edge %d (%v) is NaN or not above the one before", i, u)
			}
		}
		if len(b.Counts) != len(b.Upper)+1 {
			return fmt.Errorf("%d bin counts for %d bin edges; want one more", len(b.Counts), len(b.Upper))
		}
	case Categorical:
		if len(b.Upper) != 0 {
			return fmt.Errorf("categorical feature with %d bin edges", len(b.Upper))
		}
		if len(f.Levels) > math.MaxInt32 {
			return fmt.Errorf("%d levels", len(f.Levels))
		}
		if len(b.LevelBin) != len(f.Levels) {
			return fmt.Errorf("%d level bins for %d levels", len(b.LevelBin), len(f.Levels))
		}
		if len(b.Counts) == 0 {
			return errors.New("no bin counts")
		}
		for l, bin := range b.LevelBin {
			if int(bin) >= len(b.Counts) {
				return fmt.Errorf("level %d in bin %d of %d", l, bin, len(b.Counts))
			}
		}
	default:
		return fmt.Errorf("unknown kind %d", uint8(f.Kind))
	}
	return nil
}

func (t *Tree) checkStructure(W int, features []FeatureInfo) error {
	if t == nil {
		return errors.New("missing")
	}
	N := len(t.Nodes)
	if N == 0 || N > math.MaxInt32 {
		return fmt.Errorf("%d nodes; want 1 to %d", N, math.MaxInt32)
	}
	if t.Width != W {
		return fmt.Errorf("width %d; the model's is %d", t.Width, W)
	}
	if len(t.Gain) != N || len(t.Cover) != N || len(t.Value) != N*W {
		return fmt.Errorf("%d gains, %d covers and %d values for %d nodes of width %d", len(t.Gain), len(t.Cover), len(t.Value), N, W)
	}
	for i := range t.Nodes {
		n := &t.Nodes[i]
		if n.Feature < 0 || int(n.Feature) >= len(features) {
			return fmt.Errorf("node %d: feature %d out of range (%d features)", i, n.Feature, len(features))
		}
		if n.Left < 0 {
			if n.Left != -1 || n.LevelSet != -1 {
				return fmt.Errorf("node %d: leaf with left child %d and level set %d; want -1 and -1", i, n.Left, n.LevelSet)
			}
			continue
		}
		// Children after their parent rule out cycles, so every walk ends at a leaf.
		if int(n.Left) <= i || int(n.Left)+1 >= N {
			return fmt.Errorf("node %d: children %d and %d; want two after the node and below %d", i, n.Left, int(n.Left)+1, N)
		}
		if features[n.Feature].Kind == Numeric {
			if n.LevelSet != -1 {
				return fmt.Errorf("node %d: split on numeric feature %d with level set %d", i, n.Feature, n.LevelSet)
			}
		} else if n.LevelSet < 0 || int(n.LevelSet) >= len(t.LevelSets) {
			return fmt.Errorf("node %d: split on categorical feature %d with level set %d of %d", i, n.Feature, n.LevelSet, len(t.LevelSets))
		}
	}
	return nil
}

package forest

import (
	"errors"
	"fmt"
	"math"
)

// Kind is how a feature's values are read.
type Kind uint8

// The feature kinds.
const (
	// Numeric features are float64; NaN marks a missing value. Booleans are 0/1.
	Numeric Kind = iota + 1
	// Categorical features are level codes 0…L-1 into a list of level names; a negative
	// code marks a missing value.
	Categorical
)

func (k Kind) String() string {
	switch k {
	case Numeric:
		return "numeric"
	case Categorical:
		return "categorical"
	}
	return fmt.Sprintf("kind(%d)", uint8(k))
}

// Missing is the categorical code for a missing value.
const Missing = -1

// ErrData is wrapped by every error about the training data.
var ErrData = errors.New("forest: bad data")

// Dataset is a columnar training set. The host fills it column by column; the slices are
// kept, not copied, and must not change until training ends.
type Dataset struct {
	rows     int
	features []column
	names    map[string]int
	target   column
	weights  []float64
	exposure column // Numeric, or unset (kind 0)
	holdout  []bool // rows boosting holds out to stop early (nil: none marked)
}

type column struct {
	name   string
	kind   Kind
	num    []float64 // Numeric
	codes  []int32   // Categorical
	levels []string  // Categorical
}

// NewDataset starts a training set of n rows.
func NewDataset(rows int) *Dataset {
	return &Dataset{rows: rows, names: map[string]int{}}
}

// Rows is the number of rows.
func (d *Dataset) Rows() int { return d.rows }

// Features is the number of feature columns.
func (d *Dataset) Features() int { return len(d.features) }

func (d *Dataset) addColumn(c column, n int) error {
	if c.name == "" {
		return fmt.Errorf("%w: feature %d has no name", ErrData, len(d.features))
	}
	if _, dup := d.names[c.name]; dup {
		return fmt.Errorf("%w: feature %q is given twice", ErrData, c.name)
	}
	if n != d.rows {
		return fmt.Errorf("%w: feature %q has %d rows, want %d", ErrData, c.name, n, d.rows)
	}
	d.names[c.name] = len(d.features)
	d.features = append(d.features, c)
	return nil
}

// AddNumeric adds a numeric feature; NaN marks missing values.
func (d *Dataset) AddNumeric(name string, values []float64) error {
	return d.addColumn(column{name: name, kind: Numeric, num: values}, len(values))
}

// AddCategorical adds a categorical feature: codes index levels, negative codes are
// missing.
func (d *Dataset) AddCategorical(name string, codes []int32, levels []string) error {
	if err := checkCodes(name, codes, levels); err != nil {
		return err
	}
	return d.addColumn(column{name: name, kind: Categorical, codes: codes, levels: levels}, len(codes))
}

func checkCodes(name string, codes []int32, levels []string) error {
	if len(levels) > math.MaxInt32 {
		return fmt.Errorf("%w: column %q has too many levels", ErrData, name)
	}
	for i, c := range codes {
		if int(c) >= len(levels) {
			return fmt.Errorf("%w: column %q row %d: level code %d, but only %d levels", ErrData, name, i, c, len(levels))
		}
	}
	return nil
}

// SetRegressionTarget sets a numeric target. Every value must be finite: the host drops
// rows whose target is missing.
func (d *Dataset) SetRegressionTarget(name string, y []float64) error {
	if len(y) != d.rows {
		return fmt.Errorf("%w: target %q has %d rows, want %d", ErrData, name, len(y), d.rows)
	}
	for i, v := range y {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%w: target %q row %d: %g is not a finite number", ErrData, name, i, v)
		}
	}
	d.target = column{name: name, kind: Numeric, num: y}
	return nil
}

// SetClassTarget sets a categorical target: codes index classes. With two classes,
// classes[1] is the positive class. No code may be missing.
func (d *Dataset) SetClassTarget(name string, codes []int32, classes []string) error {
	if len(codes) != d.rows {
		return fmt.Errorf("%w: target %q has %d rows, want %d", ErrData, name, len(codes), d.rows)
	}
	if len(classes) > math.MaxUint16 {
		return fmt.Errorf("%w: target %q has %d classes, at most %d are supported", ErrData, name, len(classes), math.MaxUint16)
	}
	if err := checkCodes(name, codes, classes); err != nil {
		return err
	}
	for i, c := range codes {
		if c < 0 {
			return fmt.Errorf("%w: target %q row %d is missing", ErrData, name, i)
		}
	}
	d.target = column{name: name, kind: Categorical, codes: codes, levels: classes}
	return nil
}

// SetWeights sets row weights (nil: every row weighs 1). Weights must be finite and ≥ 0;
// a zero-weight row is as good as absent.
func (d *Dataset) SetWeights(w []float64) error {
	if w != nil && len(w) != d.rows {
		return fmt.Errorf("%w: weights have %d rows, want %d", ErrData, len(w), d.rows)
	}
	for i, v := range w {
		if !(v >= 0) || math.IsInf(v, 0) {
			return fmt.Errorf("%w: weight of row %d is %g, want a finite number ≥ 0", ErrData, i, v)
		}
	}
	d.weights = w
	return nil
}

// SetExposure sets the exposure of each row (time at risk, policy years, …) for the
// Poisson loss: log(exposure) is an offset added to the raw score, so the trees model
// the rate per unit of exposure (McCullagh & Nelder 1989, §6.2.3). Every value must be
// finite and above 0. The model stores the column's name, and Params.Exposure names it.
func (d *Dataset) SetExposure(name string, v []float64) error {
	if len(v) != d.rows {
		return fmt.Errorf("%w: exposure %q has %d rows, want %d", ErrData, name, len(v), d.rows)
	}
	for i, x := range v {
		if !(x > 0) || math.IsInf(x, 0) {
			return fmt.Errorf("%w: exposure %q row %d: %g; want a finite number above 0", ErrData, name, i, x)
		}
	}
	d.exposure = column{name: name, kind: Numeric, num: v}
	return nil
}

// SetHoldout marks the rows that boosting holds out from the trees to stop early on
// (nil: none), in place of a drawn HoldoutFraction: a validation set of the user's own
// choosing. Held-out rows still take part in binning, through their inputs only.
func (d *Dataset) SetHoldout(mask []bool) error {
	if mask != nil && len(mask) != d.rows {
		return fmt.Errorf("%w: holdout marks %d rows, want %d", ErrData, len(mask), d.rows)
	}
	d.holdout = mask
	return nil
}

// weight is row i's weight.
func (d *Dataset) weight(i int) float64 {
	if d.weights == nil {
		return 1
	}
	return d.weights[i]
}

// check runs the checks that need the whole data set.
func (d *Dataset) check(task Task) error {
	if d.rows == 0 {
		return fmt.Errorf("%w: no rows", ErrData)
	}
	if len(d.features) == 0 {
		return fmt.Errorf("%w: no features", ErrData)
	}
	if d.target.kind == 0 {
		return fmt.Errorf("%w: no target", ErrData)
	}
	if _, clash := d.names[d.target.name]; clash {
		return fmt.Errorf("%w: target %q is also a feature", ErrData, d.target.name)
	}
	if e := d.exposure.name; d.exposure.kind != 0 {
		if _, clash := d.names[e]; clash || e == d.target.name || e == "" {
			return fmt.Errorf("%w: exposure %q is empty, a feature or the target", ErrData, e)
		}
	}
	if task == Classification && d.target.kind != Categorical {
		return fmt.Errorf("%w: target %q is numeric; classification needs classes", ErrData, d.target.name)
	}
	if task == Regression && d.target.kind != Numeric {
		return fmt.Errorf("%w: target %q holds classes; regression needs numbers", ErrData, d.target.name)
	}
	total := 0.0
	for i := 0; i < d.rows; i++ {
		total += d.weight(i)
	}
	if !(total > 0) {
		return fmt.Errorf("%w: every row has weight 0", ErrData)
	}
	if task == Classification {
		seen := make([]bool, len(d.target.levels))
		distinct := 0
		for i, c := range d.target.codes {
			if !seen[c] && d.weight(i) > 0 {
				seen[c] = true
				distinct++
			}
		}
		if distinct < 2 {
			return fmt.Errorf("%w: target %q has a single class; classification needs two or more", ErrData, d.target.name)
		}
	}
	return nil
}

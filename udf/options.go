package udf

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// trainOptions are copse_train's named arguments, all optional. Counts are declared
// DOUBLE so that 100 and 100.0 both work; a fraction where a whole number belongs is an
// error rather than DuckDB's silent rounding (which a BIGINT declaration would bring).
// A NULL option means "not given".
var trainOptions = []duck.Param{
	{Name: "target", Type: duck.Varchar},
	{Name: "method", Type: duck.Varchar},
	{Name: "task", Type: duck.Varchar},
	{Name: "trees", Type: duck.Double},
	{Name: "max_depth", Type: duck.Double},
	{Name: "min_leaf", Type: duck.Double},
	{Name: "min_gain", Type: duck.Double},
	{Name: "impurity", Type: duck.Varchar},
	{Name: "features_per_split", Type: duck.Double},
	{Name: "row_fraction", Type: duck.Double},
	{Name: "with_replacement", Type: duck.Boolean},
	{Name: "bins", Type: duck.Double},
	{Name: "weight", Type: duck.Varchar},
	{Name: "key", Type: duck.Varchar},
	{Name: "exclude", Type: duck.VarcharList},
	{Name: "positive", Type: duck.Varchar},
	{Name: "seed", Type: duck.Double},
	{Name: "threads", Type: duck.Double},
	// Boosting only.
	{Name: "loss", Type: duck.Varchar},
	{Name: "learning_rate", Type: duck.Double},
	{Name: "leaf_penalty", Type: duck.Double},
	{Name: "holdout_fraction", Type: duck.Double},
	{Name: "holdout", Type: duck.Varchar},
	{Name: "patience", Type: duck.Double},
	{Name: "leaf_limit", Type: duck.Double},
	{Name: "quantile", Type: duck.Double},
	{Name: "exposure", Type: duck.Varchar},
	// Linear only.
	{Name: "ridge", Type: duck.Double},
}

// treeOptions are the options that shape trees, which method 'linear' grows none of.
var treeOptions = []string{"trees", "max_depth", "min_leaf", "min_gain", "impurity", "features_per_split",
	"row_fraction", "with_replacement", "bins"}

// boostOptions are the options only method 'boosting' takes.
var boostOptions = []string{"loss", "learning_rate", "leaf_penalty", "holdout_fraction", "holdout", "patience", "leaf_limit", "quantile", "exposure"}

// Task option values; "auto" lets the target's type decide.
const (
	taskAuto           = "auto"
	taskClassification = string(forest.Classification)
	taskRegression     = string(forest.Regression)
)

// maxWhole bounds whole-number options so the conversion to int cannot overflow; no
// sensible count comes near it. maxSeed is the largest integer a DOUBLE holds exactly.
const (
	maxWhole = math.MaxInt32
	maxSeed  = 1 << 53
)

// trainCall is one copse_train call, parsed and checked as far as the options alone
// allow. Bind builds it; the fill uses the same value.
type trainCall struct {
	name   string
	source string // as the user wrote it, trimmed
	query  string // the SELECT that reads the source

	target   string
	weight   string // "" for none
	exposure string // "" for none: loss 'poisson''s offset column
	// holdout is the source of the rows boosting stops early on, as written ("" for
	// none), and holdoutQuery the SELECT that reads it.
	holdout, holdoutQuery string
	key                   string // "" for none
	exclude               []string
	positive              string
	hasPos                bool
	task                  string // taskAuto, taskClassification or taskRegression
	impurity              bool   // impurity was given

	params forest.Params
}

// parseTrainCall reads copse_train's arguments. It has no side effects.
func parseTrainCall(args []any, named map[string]any) (*trainCall, error) {
	name, _ := args[0].(string)
	if args[0] == nil {
		return nil, errors.New("copse_train: the model name is NULL")
	}
	if err := validModelName(name); err != nil {
		return nil, fmt.Errorf("copse_train: %w", err)
	}
	c := &trainCall{name: name, task: taskAuto}
	fail := func(format string, a ...any) error {
		return fmt.Errorf("copse_train %q: "+format, append([]any{name}, a...)...)
	}
	src, ok := args[1].(string)
	if !ok {
		return nil, fail("the source is NULL: give a table or view name, a table function call or a query")
	}
	c.source = strings.TrimSpace(src)
	q, err := sourceQuery(c.source)
	if err != nil {
		return nil, fail("%w", err)
	}
	c.query = q

	text := func(opt string) (string, bool, error) {
		v, ok := named[opt].(string)
		if !ok {
			return "", false, nil
		}
		if strings.TrimSpace(v) == "" {
			return "", false, fail("%s is empty", opt)
		}
		return v, true, nil
	}
	if c.target, ok, err = text("target"); err != nil {
		return nil, err
	} else if !ok {
		return nil, fail("target := 'column' is required: name the column to predict")
	}
	if c.weight, _, err = text("weight"); err != nil {
		return nil, err
	}
	if c.key, _, err = text("key"); err != nil {
		return nil, err
	}
	if c.exposure, _, err = text("exposure"); err != nil {
		return nil, err
	}
	if c.positive, c.hasPos, err = text("positive"); err != nil {
		return nil, err
	}
	if c.holdout, _, err = text("holdout"); err != nil {
		return nil, err
	}
	if c.holdout != "" {
		if c.holdoutQuery, err = sourceQuery(c.holdout); err != nil {
			return nil, fail("holdout: %w", err)
		}
		if _, both := named["holdout_fraction"].(float64); both {
			return nil, fail("holdout and holdout_fraction: give one or the other")
		}
	}
	for _, col := range []struct{ opt, v string }{{"weight", c.weight}, {"key", c.key}, {"exposure", c.exposure}} {
		if col.v != "" && strings.EqualFold(col.v, c.target) {
			return nil, fail("%s %q is the target", col.opt, col.v)
		}
	}
	if ex, ok := named["exclude"].([]string); ok {
		for _, e := range ex {
			if strings.TrimSpace(e) == "" {
				return nil, fail("exclude holds an empty name")
			}
			if strings.EqualFold(e, c.target) {
				return nil, fail("exclude names the target %q", e)
			}
		}
		c.exclude = ex
	}

	method := forest.MethodForest
	if v, ok, err := text("method"); err != nil {
		return nil, err
	} else if ok {
		switch m := forest.Method(strings.ToLower(v)); m {
		case forest.MethodForest, forest.MethodBagging, forest.MethodTree, forest.MethodBoosting, forest.MethodAdaBoost, forest.MethodLinear:
			method = m
		default:
			return nil, fail("method %q: want 'forest', 'bagging', 'tree', 'boosting', 'adaboost' or 'linear'", v)
		}
	}
	if method == forest.MethodLinear {
		for _, opt := range append(slices.Clone(treeOptions), boostOptions...) {
			if named[opt] != nil {
				return nil, fail("%s: method 'linear' does not take it: it fits coefficients, not trees; it takes ridge", opt)
			}
		}
	} else if named["ridge"] != nil {
		return nil, fail("ridge: method '%s' does not take it; it applies to method := 'linear'", method)
	}
	// An option the method does not use would be silently ignored: refuse it instead.
	if method == forest.MethodBoosting {
		for _, opt := range []string{"impurity", "with_replacement"} {
			if named[opt] != nil {
				why := "boosted trees are regression trees fitted to the loss's gradients"
				if opt == "with_replacement" {
					why = "each boosting round draws its rows without replacement (see row_fraction)"
				}
				return nil, fail("%s: method 'boosting' does not take it: %s; it applies to 'forest', 'bagging' and 'tree'", opt, why)
			}
		}
	} else if method == forest.MethodAdaBoost {
		// AdaBoost reweights every row each round and shrinks by learning_rate only.
		for _, opt := range append(slices.Clone(boostOptions), "row_fraction", "with_replacement") {
			if named[opt] != nil && opt != "learning_rate" {
				return nil, fail("%s: method 'adaboost' does not take it: each round fits every row, reweighted; "+
					"it takes trees, max_depth and learning_rate", opt)
			}
		}
	} else if method != forest.MethodLinear {
		for _, opt := range boostOptions {
			if named[opt] != nil {
				if opt == "learning_rate" {
					return nil, fail("%s: method '%s' does not take it; it applies to method := 'boosting' and 'adaboost'", opt, method)
				}
				return nil, fail("%s: method '%s' does not take it; it applies to method := 'boosting'", opt, method)
			}
		}
	}
	p := forest.DefaultParams(method)
	if v, ok, err := text("task"); err != nil {
		return nil, err
	} else if ok {
		switch t := strings.ToLower(v); t {
		case taskAuto:
		case taskClassification, taskRegression:
			c.task = t
			p.Task = forest.Task(t)
		default:
			return nil, fail("task %q: want 'auto', 'classification' or 'regression'", v)
		}
	}
	if v, ok, err := text("impurity"); err != nil {
		return nil, err
	} else if ok {
		switch i := forest.Impurity(strings.ToLower(v)); i {
		case forest.Gini, forest.Entropy:
			p.Impurity, c.impurity = i, true
		default:
			return nil, fail("impurity %q: want 'gini' or 'entropy'", v)
		}
	}

	num := func(opt string) (float64, bool, error) {
		v, ok := named[opt].(float64)
		if ok && (math.IsNaN(v) || math.IsInf(v, 0)) {
			return 0, false, fail("%s %v: want a finite number", opt, v)
		}
		return v, ok, nil
	}
	whole := func(opt string, dst *int) error {
		v, ok, err := num(opt)
		if err != nil || !ok {
			return err
		}
		if v != math.Trunc(v) || math.Abs(v) > maxWhole {
			return fail("%s %v: want a whole number", opt, v)
		}
		*dst = int(v)
		return nil
	}
	number := func(opt string, dst *float64) error {
		v, ok, err := num(opt)
		if ok {
			*dst = v
		}
		return err
	}
	for _, o := range []struct {
		opt string
		i   *int
		f   *float64
	}{
		{"trees", &p.Trees, nil}, {"max_depth", &p.MaxDepth, nil}, {"bins", &p.Bins, nil},
		{"threads", &p.Threads, nil}, {"min_leaf", nil, &p.MinLeaf}, {"min_gain", nil, &p.MinGain},
		{"features_per_split", nil, &p.FeaturesPerSplit}, {"row_fraction", nil, &p.RowFraction},
		{"learning_rate", nil, &p.LearningRate}, {"leaf_penalty", nil, &p.LeafPenalty},
		{"holdout_fraction", nil, &p.HoldoutFraction}, {"patience", &p.Patience, nil},
		{"leaf_limit", &p.LeafLimit, nil}, {"quantile", nil, &p.Quantile}, {"ridge", nil, &p.Ridge},
	} {
		var err error
		if o.i != nil {
			err = whole(o.opt, o.i)
		} else {
			err = number(o.opt, o.f)
		}
		if err != nil {
			return nil, err
		}
	}
	if v, ok, err := text("loss"); err != nil {
		return nil, err
	} else if ok {
		switch l := forest.Loss(strings.ToLower(v)); l {
		case forest.LossSquared, forest.LossAbsolute, forest.LossHuber, forest.LossQuantile,
			forest.LossPoisson, forest.LossLogistic, forest.LossMultinomial:
			p.Loss = l
		default:
			return nil, fail("loss %q: want 'squared', 'absolute', 'huber', 'quantile' or 'poisson' (regression), "+
				"'logistic' (two classes) or 'multinomial' (three or more)", v)
		}
	}
	if c.exposure != "" && p.Loss != forest.LossPoisson {
		return nil, fail("exposure: only loss := 'poisson' takes it")
	}
	if named["quantile"] != nil {
		if p.Loss != forest.LossQuantile {
			return nil, fail("quantile: only loss := 'quantile' takes it")
		}
		if !(p.Quantile > 0 && p.Quantile < 1) {
			return nil, fail("quantile %v: want a number in (0, 1)", p.Quantile)
		}
	}
	if v, ok := named["with_replacement"].(bool); ok {
		p.WithReplacement = v
	}
	if v, ok, err := num("seed"); err != nil {
		return nil, err
	} else if ok {
		if v != math.Trunc(v) || v < 0 || v > maxSeed {
			return nil, fail("seed %v: want a whole number from 0 to 2^53", v)
		}
		p.Seed = uint64(v)
	}
	if method != forest.MethodForest && method != forest.MethodBoosting && named["features_per_split"] != nil {
		return nil, fail("features_per_split: method '%s' considers every feature at each split; it applies to 'forest' and 'boosting'", method)
	}
	if method == forest.MethodTree {
		// A single tree takes every row once: a sampling option would be silently ignored.
		for _, opt := range []string{"row_fraction", "with_replacement"} {
			if named[opt] != nil {
				return nil, fail("%s: method 'tree' uses every row once; it applies to 'forest' and 'bagging'", opt)
			}
		}
	}
	if err := p.Validate(); err != nil {
		return nil, fail("%w", err)
	}
	c.params = p
	return c, nil
}

package udf

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// registerBlends registers copse_blend, which stores a blend of stored models as a new
// model version, and copse_members, which lists a blend's members.
func (h *Host) registerBlends(conn *sql.Conn) error {
	for _, f := range []duck.TableFunc{
		{Name: "copse_blend", Args: []duck.Type{duck.Varchar}, Named: []duck.Param{
			{Name: "members", Type: duck.VarcharList}, {Name: "rule", Type: duck.Varchar},
			{Name: "weights", Type: duck.Varchar}}, Bind: h.bindBlend},
		{Name: "copse_members", Args: []duck.Type{duck.Varchar}, Bind: h.bindMembers},
	} {
		if err := duck.RegisterTable(conn, f); err != nil {
			return err
		}
	}
	return nil
}

// blendCall is one parsed copse_blend call.
type blendCall struct {
	name    string
	members []string
	rule    forest.BlendRule
	weights []float64 // nil: equal
}

// parseBlendCall checks copse_blend's arguments: a model name, members := a non-empty list
// of model references, rule := 'average' (the default) or 'vote', weights := a
// comma-separated list of numbers ≥ 0, one per member (default: equal). 'fit' for rule
// or weights is refused: learned weights are not built yet.
func parseBlendCall(args []any, named map[string]any) (*blendCall, error) {
	const fn = "copse_blend"
	name, ok := args[0].(string)
	if !ok {
		return nil, fmt.Errorf("%s: %w: the model name is NULL", fn, ErrCall)
	}
	if err := validModelName(name); err != nil {
		return nil, fmt.Errorf("%s: %w: %v", fn, ErrCall, err)
	}
	c := &blendCall{name: name, rule: forest.BlendAverage}
	members, _ := named["members"].([]string)
	if len(members) == 0 {
		return nil, fmt.Errorf("%s %q: %w: members := ['model', 'model@version', …] is required", fn, name, ErrCall)
	}
	for _, m := range members {
		if _, err := parseRef(m); err != nil {
			return nil, fmt.Errorf("%s %q: %w: members: %v", fn, name, ErrCall, err)
		}
	}
	c.members = members
	if r, ok := named["rule"].(string); ok {
		switch forest.BlendRule(r) {
		case forest.BlendAverage, forest.BlendVote:
			c.rule = forest.BlendRule(r)
		case "fit":
			return nil, fmt.Errorf("%s %q: %w: rule 'fit': learned (stacked) weights are not yet supported; use rule := 'average' or 'vote' with weights := '…'", fn, name, ErrCall)
		default:
			return nil, fmt.Errorf("%s %q: %w: rule '%s': want 'average' or 'vote'", fn, name, ErrCall, sqlEscape(r))
		}
	}
	if w, ok := named["weights"].(string); ok {
		if strings.TrimSpace(w) == "fit" {
			return nil, fmt.Errorf("%s %q: %w: weights 'fit': learned (stacked) weights are not yet supported; give one number per member", fn, name, ErrCall)
		}
		parts := strings.Split(w, ",")
		if len(parts) != len(members) {
			return nil, fmt.Errorf("%s %q: %w: weights '%s': %d weights for %d members", fn, name, ErrCall, sqlEscape(w), len(parts), len(members))
		}
		for j, p := range parts {
			v, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
			if err != nil || !(v >= 0) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("%s %q: %w: weights: member '%s' has weight '%s'; want a finite number ≥ 0", fn, name, ErrCall, sqlEscape(members[j]), sqlEscape(strings.TrimSpace(p)))
			}
			c.weights = append(c.weights, v)
		}
	}
	return c, nil
}

// bindBlend checks the options; loading the members, building and saving happen in the
// first fill, so binding has no side effects.
func (h *Host) bindBlend(call duck.TableCall) (*duck.TableBinding, error) {
	c, err := parseBlendCall(call.Args, call.Named)
	if err != nil {
		return nil, err
	}
	connID := call.ConnID
	return &duck.TableBinding{
		Columns: trainColumns,
		Init: func() (duck.FillFunc, error) {
			var e Entry
			return onceRows(func() (int, error) {
				var err error
				e, err = h.blend(h.contextOf(connID), c)
				return 1, err
			}, func(out *duck.Chunk, k, _ int) {
				setEntryHead(out, k, e)
				out.SetInt64(6, k, 0)
				out.SetInt64(7, k, int64(e.Features))
				out.SetInt64(8, k, int64(e.Trees))
				setOOB(out, 9, k, e)
				out.SetFloat64(11, k, 0)
			}), nil
		},
	}, nil
}

// blend loads the members, builds the blend and saves it as a new version of c.name.
// Nothing reaches the catalog unless every step succeeds.
func (h *Host) blend(ctx context.Context, c *blendCall) (Entry, error) {
	const fn = "copse_blend"
	members := make([]*forest.Model, len(c.members))
	names := make([]string, len(c.members))
	target := ""
	// kinds: each member feature's recorded source kind, by name; the first member
	// recording one wins.
	kinds := map[string]string{}
	for j, ref := range c.members {
		m, e, err := h.loadModel(ctx, ref)
		if err != nil {
			return Entry{}, fmt.Errorf("%s %q: member '%s': %w", fn, c.name, sqlEscape(ref), err)
		}
		if j == 0 {
			target = m.Target
		} else if m.Target != target {
			return Entry{}, fmt.Errorf("%s %q: member '%s' predicts %q, the first member %q", fn, c.name, sqlEscape(ref), m.Target, target)
		}
		members[j], names[j] = m, fmt.Sprintf("%s@%d", e.Name, e.Version)
		if len(e.FeatureTypes) == len(m.Features) {
			for i, f := range m.Features {
				if k := e.FeatureTypes[i]; k != "" && kinds[f.Name] == "" {
					kinds[f.Name] = k
				}
			}
		}
	}
	b, err := forest.NewBlend(target, members, names, c.weights, c.rule)
	if err != nil {
		return Entry{}, fmt.Errorf("%s %q: %w", fn, c.name, err)
	}
	var types []string // nil: no member recorded any kind
	if len(kinds) > 0 {
		types = make([]string, len(b.Features))
		for i, f := range b.Features {
			types[i] = kinds[f.Name] // "": not known, stored as NULL
		}
	}
	e, err := h.saveModel(ctx, c.name, b, "blend of "+strings.Join(names, ", "), nil, nil, nil, types)
	if err != nil {
		return Entry{}, fmt.Errorf("%s %q: %w", fn, c.name, err)
	}
	return e, nil
}

// bindMembers: copse_members(model) → member (name@version as blended), weight
// (normalised to sum 1), rule: one row per member of a blend, in blend order.
func (h *Host) bindMembers(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_members"
	m, e, _, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	b := m.Blend
	if b == nil {
		return nil, fmt.Errorf("%s: model %q (version %d), method %s, has no members: only copse_blend makes blends",
			fn, e.Name, e.Version, m.Method)
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "member", Type: duck.Varchar}, {Name: "weight", Type: duck.Double},
			{Name: "rule", Type: duck.Varchar}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(len(b.Members), func(out *duck.Chunk, j, r int) {
				out.SetString(0, j, b.Names[r])
				out.SetFloat64(1, j, b.Weights[r])
				out.SetString(2, j, string(b.Rule))
			}), nil
		},
	}, nil
}

package main

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"os"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/internal/plots"
	"github.com/copse-dev/copse/udf"
)

// PlotOptions are the inputs of `copse plot`.
type PlotOptions struct {
	IO       *IOStreams
	OpenHost func(ctx context.Context, path string) (*udf.Host, error)

	DB      string      // database file holding the model
	Picture pictureSpec // what to draw
	Output  string      // picture file; its extension (.png, .svg) picks the format
}

// pictureSpec says which picture to draw from which relation.
type pictureSpec struct {
	Kind   string   // one of pictureKinds
	Models []string // one model; several only for roc, drawn together
	Source string   // rows to score (roc, calibration, dependence, drift)
	// SourceName names the source in titles; "" shows Source itself, cut short.
	SourceName string
	Feature    string // dependence: the feature to vary
	Method     string // importance: 'impurity' or 'permutation'; "" for copse_importance's default
}

// pictureKinds are the kinds `copse plot` draws, in the order help lists them.
var pictureKinds = []string{"importance", "curve", "roc", "calibration", "dependence", "drift"}

// needsSource reports whether kind scores rows of a source.
func needsSource(kind string) bool { return kind != "importance" && kind != "curve" }

func newPlotCmd(d *Deps, runF func(context.Context, *PlotOptions) error) *cobra.Command {
	opts := &PlotOptions{IO: d.IO, OpenHost: d.OpenHost}
	cmd := &cobra.Command{
		Use:   "plot KIND --db FILE --model M [--source SOURCE] [--feature F] -o FILE.png|FILE.svg",
		Short: "Draw a picture of a model: importance, curve, roc, calibration, dependence or drift",
		Long: `Draw one picture of a stored model from the copse_* relation of the same name and
write it as PNG or SVG, by the output file's extension.

  importance    copse_importance: a bar per feature, most important on top
                (--method permutation adds error bars of ± one standard deviation)
  curve         copse_curve: out-of-bag error by number of trees, or the loss by
                boosting round (training and holdout)
  roc           copse_roc on --source (which needs the target column), with the AUC;
                give --model more than once to compare models on one picture
  calibration   copse_calibration on --source: observed rate against predicted
                probability per bin, with each bin's rows
  dependence    copse_dependence on --source for --feature: the average prediction as
                the feature varies (a line, or bars for a categorical feature)
  drift         copse_drift on --source: each input's population stability index,
                coloured by status, with the 0.10 and 0.25 thresholds

SOURCE is a table or view name or a query, as for the copse_* functions.`,
		Example: `  copse plot importance --db demo.duckdb --model late_risk -o importance.png
  copse plot roc --db demo.duckdb --model late_risk --model late_boost \
      --source "SELECT n.*, o.late_30 FROM new_invoices n JOIN new_invoice_outcomes o USING (invoice_id)" -o roc.svg
  copse plot dependence --db demo.duckdb --model late_risk --source new_invoices --feature credit_use -o credit_use.png`,
		Args:      argsUsage(cobra.ExactArgs(1)),
		ValidArgs: pictureKinds,
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.Picture.Kind = args[0]
			if err := checkPlotOptions(cmd, opts); err != nil {
				return err
			}
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runPlot(cmd.Context(), opts)
		},
	}
	cmd.Flags().StringVar(&opts.DB, "db", "", "DuckDB database `FILE` that holds the model")
	cmd.Flags().StringArrayVar(&opts.Picture.Models, "model", nil, "the `MODEL` to draw ('name' or 'name@version'); roc takes several")
	cmd.Flags().StringVar(&opts.Picture.Source, "source", "", "table, view or query `SOURCE` whose rows are scored (roc, calibration, dependence, drift)")
	cmd.Flags().StringVar(&opts.Picture.Feature, "feature", "", "the `FEATURE` whose partial dependence is drawn (dependence)")
	cmd.Flags().StringVar(&opts.Picture.Method, "method", "", "importance `METHOD`: impurity (default) or permutation (importance)")
	cmd.Flags().StringVarP(&opts.Output, "output", "o", "", "write the picture to `FILE` (.png or .svg)")
	return cmd
}

// checkPlotOptions checks the flags against the kind; each error names its flag.
func checkPlotOptions(cmd *cobra.Command, opts *PlotOptions) error {
	p := &opts.Picture
	if !slices.Contains(pictureKinds, p.Kind) {
		return usageErrorf(cmd, "unknown picture kind %q: want %s", p.Kind, strings.Join(pictureKinds, ", "))
	}
	switch {
	case opts.DB == "":
		return usageErrorf(cmd, "--db: give the database file that holds the model")
	case len(p.Models) == 0:
		return usageErrorf(cmd, "--model: give the model to draw")
	case len(p.Models) > 1 && p.Kind != "roc":
		return usageErrorf(cmd, "--model: %s draws one model, got %d (only roc compares several)", p.Kind, len(p.Models))
	case needsSource(p.Kind) && p.Source == "":
		return usageErrorf(cmd, "--source: %s scores rows: give a table, view or query with the model's inputs", p.Kind)
	case !needsSource(p.Kind) && p.Source != "":
		return usageErrorf(cmd, "--source: %s reads the model alone and takes no source", p.Kind)
	case p.Kind == "dependence" && p.Feature == "":
		return usageErrorf(cmd, "--feature: dependence needs the feature to vary")
	case p.Kind != "dependence" && p.Feature != "":
		return usageErrorf(cmd, "--feature: only dependence takes a feature, not %s", p.Kind)
	case p.Method != "" && p.Kind != "importance":
		return usageErrorf(cmd, "--method: only importance takes a method, not %s", p.Kind)
	case p.Method != "" && p.Method != "impurity" && p.Method != "permutation":
		return usageErrorf(cmd, "--method: unknown importance method %q: want impurity or permutation", p.Method)
	case opts.Output == "":
		return usageErrorf(cmd, "-o: give the picture file to write (.png or .svg)")
	}
	if _, err := plots.FormatOf(opts.Output); err != nil {
		return usageErrorf(cmd, "-o: %v", strings.TrimPrefix(err.Error(), "plots: "))
	}
	return nil
}

func runPlot(ctx context.Context, opts *PlotOptions) error {
	// Opening a missing file would create an empty database, which holds no model.
	if _, err := os.Stat(opts.DB); err != nil {
		return fmt.Errorf("--db: %w", err)
	}
	h, err := opts.OpenHost(ctx, opts.DB)
	if err != nil {
		return err
	}
	defer h.Close()
	pic, err := drawPicture(ctx, h.DB(), opts.Picture)
	if err != nil {
		return err
	}
	if err := pic.Save(opts.Output); err != nil {
		return err
	}
	fmt.Fprintf(opts.IO.ErrOut, "Wrote %s\n", opts.Output)
	return nil
}

// querier runs a query: a *sql.DB or a *sql.Conn.
type querier interface {
	QueryContext(ctx context.Context, query string, args ...any) (*sql.Rows, error)
}

// drawPicture runs the copse_* query for spec on q and draws its result.
func drawPicture(ctx context.Context, q querier, spec pictureSpec) (*plots.Picture, error) {
	model := spec.Models[0]
	m, src := sqlString(model), sqlString(spec.Source)
	switch spec.Kind {
	case "importance":
		call, how := "copse_importance("+m+")", "impurity decrease"
		if spec.Method != "" {
			call = fmt.Sprintf("copse_importance(%s, method := %s)", m, sqlString(spec.Method))
			how = spec.Method
		}
		rows, err := queryRows(ctx, q, "SELECT feature, importance, std FROM "+call+" ORDER BY rank",
			func(s scanner) (plots.ImportanceRow, error) {
				var r plots.ImportanceRow
				var std sql.NullFloat64
				err := s.Scan(&r.Feature, &r.Importance, &std)
				r.Std = orNaN(std)
				return r, err
			})
		if err != nil {
			return nil, err
		}
		x := "importance (" + how + ")"
		if spec.Method == "permutation" {
			x = "importance (permutation: loss of quality when the feature is shuffled; bars ± 1 std)"
		}
		return plots.Importance(plots.Labels{Title: fmt.Sprintf("Feature importance of %s (%s)", model, how), X: x}, rows)
	case "curve":
		pts, err := queryRows(ctx, q, "SELECT trees, metric, value FROM copse_curve("+m+")",
			func(s scanner) (plots.CurvePoint, error) {
				var p plots.CurvePoint
				var v sql.NullFloat64
				err := s.Scan(&p.Trees, &p.Metric, &v)
				p.Value = orNaN(v)
				return p, err
			})
		if err != nil {
			return nil, err
		}
		return plots.Curve(curveLabels(model, pts), pts)
	case "roc":
		curves := make([]plots.ROCCurve, len(spec.Models))
		for i, name := range spec.Models {
			pts, err := queryRows(ctx, q, fmt.Sprintf("SELECT threshold, true_positive_rate, false_positive_rate FROM copse_roc(%s, %s)", sqlString(name), src),
				func(s scanner) (plots.ROCPoint, error) {
					var p plots.ROCPoint
					return p, s.Scan(&p.Threshold, &p.TruePositiveRate, &p.FalsePositiveRate)
				})
			if err != nil {
				return nil, err
			}
			curves[i] = plots.ROCCurve{Name: name, Points: pts}
		}
		title := fmt.Sprintf("ROC curve of %s on %s", model, sourceLabel(spec))
		if len(curves) > 1 {
			title = "ROC curves on " + sourceLabel(spec)
		}
		return plots.ROC(plots.Labels{Title: title}, curves...)
	case "calibration":
		bins, err := queryRows(ctx, q, fmt.Sprintf("SELECT bin, mean_predicted, observed_rate, rows FROM copse_calibration(%s, %s) ORDER BY bin", m, src),
			func(s scanner) (plots.CalibrationBin, error) {
				var b plots.CalibrationBin
				var mean, rate sql.NullFloat64
				err := s.Scan(&b.Bin, &mean, &rate, &b.Rows)
				b.MeanPredicted, b.ObservedRate = orNaN(mean), orNaN(rate)
				return b, err
			})
		if err != nil {
			return nil, err
		}
		return plots.Calibration(plots.Labels{Title: fmt.Sprintf("Calibration of %s on %s", model, sourceLabel(spec))}, bins)
	case "dependence":
		pts, err := queryRows(ctx, q, fmt.Sprintf("SELECT feature_value, output, average_prediction FROM copse_dependence(%s, %s, %s) ORDER BY point",
			m, src, sqlString(spec.Feature)),
			func(s scanner) (plots.DependencePoint, error) {
				var p plots.DependencePoint
				var out sql.NullString
				err := s.Scan(&p.Value, &out, &p.Average)
				p.Output = out.String
				return p, err
			})
		if err != nil {
			return nil, err
		}
		y := "average prediction"
		if outs := outputsOf(pts); len(outs) == 1 && outs[0] != "" {
			y = fmt.Sprintf("average probability of %s", outs[0])
		} else if len(outs) > 1 {
			y = "average probability"
		}
		return plots.Dependence(plots.Labels{Title: fmt.Sprintf("Partial dependence of %s on %s (%s)", model, spec.Feature, sourceLabel(spec)),
			X: spec.Feature, Y: y}, pts)
	case "drift":
		rows, err := queryRows(ctx, q, fmt.Sprintf("SELECT feature, psi, status FROM copse_drift(%s, %s)", m, src),
			func(s scanner) (plots.DriftRow, error) {
				var r plots.DriftRow
				var psi sql.NullFloat64
				err := s.Scan(&r.Feature, &psi, &r.Status)
				r.PSI = orNaN(psi)
				return r, err
			})
		if err != nil {
			return nil, err
		}
		return plots.Drift(plots.Labels{Title: fmt.Sprintf("Drift of %s's inputs on %s", model, sourceLabel(spec))}, rows)
	}
	return nil, fmt.Errorf("unknown picture kind %q", spec.Kind)
}

// scanner is the row a scan function reads.
type scanner interface{ Scan(dest ...any) error }

// queryRows runs query and converts each row with scan.
func queryRows[T any](ctx context.Context, q querier, query string, scan func(scanner) (T, error)) ([]T, error) {
	rows, err := q.QueryContext(ctx, query)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []T
	for rows.Next() {
		v, err := scan(rows)
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	return out, nil
}

// curveLabels names a curve's axes after its metrics (copse_curve's metric column).
func curveLabels(model string, pts []plots.CurvePoint) plots.Labels {
	var has = map[string]bool{}
	for _, p := range pts {
		has[p.Metric] = true
	}
	switch {
	case has["train_loss"]:
		return plots.Labels{Title: "Loss of " + model + " by boosting round", X: "boosting round", Y: "loss"}
	case has["weighted_error"]:
		return plots.Labels{Title: "Rounds of " + model, X: "round", Y: "weighted error and vote weight"}
	case has["mse"]:
		return plots.Labels{Title: "Out-of-bag error of " + model + " by number of trees", X: "trees", Y: "out-of-bag mean squared error"}
	default:
		return plots.Labels{Title: "Out-of-bag error of " + model + " by number of trees", X: "trees", Y: "out-of-bag error rate"}
	}
}

func outputsOf(pts []plots.DependencePoint) []string {
	var outs []string
	for _, p := range pts {
		if !slices.Contains(outs, p.Output) {
			outs = append(outs, p.Output)
		}
	}
	return outs
}

// sourceLabel is a picture's source as its title shows it: its name when it has one,
// else the source itself, a long query cut short.
func sourceLabel(spec pictureSpec) string {
	if spec.SourceName != "" {
		return spec.SourceName
	}
	const most = 40 // characters: a title has room for about 70
	if r := []rune(spec.Source); len(r) > most {
		return string(r[:most-1]) + "…"
	}
	return spec.Source
}

// sqlString quotes s as an SQL string literal.
func sqlString(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }

func orNaN(v sql.NullFloat64) float64 {
	if !v.Valid {
		return math.NaN()
	}
	return v.Float64
}

package main

import (
	"context"
	"database/sql"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"unicode"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/internal/demodata"
	"github.com/copse-dev/copse/internal/demodb"
	"github.com/copse-dev/copse/internal/sqlrun"
	scripts "github.com/copse-dev/copse/sql"
	"github.com/copse-dev/copse/udf"
)

// DemoOptions are the inputs of `copse demo`.
type DemoOptions struct {
	IO         *IOStreams
	OpenHost   func(ctx context.Context, path string) (*udf.Host, error)
	Interrupts func() (<-chan os.Signal, func())

	DB     string // keep the demo's tables and models in this database file; "" for memory
	Script string // the demo script (sql/demo.sql, embedded)
	// PictureDir is the folder the demo's pictures are written to after the script;
	// "" for none.
	PictureDir string
	Pictures   []demoPicture // the pictures to draw (demoPictures)
}

func newDemoCmd(d *Deps, runF func(context.Context, *DemoOptions) error) *cobra.Command {
	opts := &DemoOptions{IO: d.IO, OpenHost: d.OpenHost, Interrupts: d.Interrupts, Script: scripts.Demo, Pictures: demoPictures}
	cmd := &cobra.Command{
		Use:   "demo [--db FILE] [--pictures DIR]",
		Short: "Run the built-in example: late invoices of an invented distributor",
		Long: fmt.Sprintf(`Build an invented data set — %d invoices of a fictional wholesale distributor, whose
lateness follows a known rule, and %d new invoices to score — then run the demo script
(sql/demo.sql): train a random forest, read its out-of-bag error and feature importance,
score the new invoices, train a gradient-boosted model beside it and compare the two on
the new invoices' known outcomes, and list the models. Then draw pictures of the models
(importance, error curves, ROC curves, calibration, partial dependence, drift) into the
folder given by --pictures, as 'copse plot' draws them.

With --db the tables and models are kept in FILE (which must not hold them already), so
that the recipes in sql/ can be run on it afterwards with 'copse sql --db FILE'.`, demodata.TrainRows, demodata.NewRows),
		Args: argsUsage(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runDemo(cmd.Context(), opts)
		},
	}
	cmd.Flags().StringVar(&opts.DB, "db", "", "keep the demo's tables and models in database `FILE`")
	cmd.Flags().StringVar(&opts.PictureDir, "pictures", defaultPictureDir, "write the demo's pictures into folder `DIR` (created if missing; \"\" for none)")
	return cmd
}

func runDemo(ctx context.Context, opts *DemoOptions) error {
	h, err := opts.OpenHost(ctx, opts.DB)
	if err != nil {
		return err
	}
	defer h.Close()
	// From here on, Ctrl-C stops the running statement (or the data generation)
	// instead of the process.
	ctx, stop := interruptible(ctx, opts.Interrupts)
	defer stop()
	fmt.Fprintf(opts.IO.ErrOut, "Generating the demo data (%d invoices, %d new invoices)…\n", demodata.TrainRows, demodata.NewRows)
	if err := demodb.Load(ctx, h.DB(), demodata.DefaultSeed); err != nil {
		return interruptedErr(ctx, err)
	}
	r, closeConn, err := newRunner(ctx, h, opts.IO, sqlrun.FormatTable)
	if err != nil {
		return interruptedErr(ctx, err)
	}
	defer closeConn()
	r.Status = nil // the demo's output is its results and notes only
	if err := r.Script(ctx, opts.Script); err != nil {
		return interruptedErr(ctx, err)
	}
	if opts.PictureDir == "" {
		return nil
	}
	return interruptedErr(ctx, writeDemoPictures(ctx, h.DB(), opts))
}

// defaultPictureDir is where `copse demo` puts its pictures unless told otherwise.
const defaultPictureDir = "copse-demo-pictures"

// demoPicture is one of the demo's pictures: File in the picture folder, drawn as
// Spec says. With TopFeature, Spec.Feature is the model's most important feature
// (impurity decrease) and "%s" in File is replaced by it.
type demoPicture struct {
	File       string
	Spec       pictureSpec
	TopFeature bool
}

// demoOutcomes are the new invoices with their known outcomes: what copse_roc and
// copse_calibration need.
const demoOutcomes = "SELECT n.*, o.late_30 FROM new_invoices n JOIN new_invoice_outcomes o ON o.invoice_id = n.invoice_id"

// demoPictures are the pictures `copse demo` draws of the models sql/demo.sql trains.
var demoPictures = []demoPicture{
	{File: "late_risk-importance.png", Spec: pictureSpec{Kind: "importance", Models: []string{"late_risk"}, Method: "permutation"}},
	{File: "late_risk-curve.png", Spec: pictureSpec{Kind: "curve", Models: []string{"late_risk"}}},
	{File: "late_boost-curve.png", Spec: pictureSpec{Kind: "curve", Models: []string{"late_boost"}}},
	{File: "roc.png", Spec: pictureSpec{Kind: "roc", Models: []string{"late_risk", "late_boost", "late_linear", "late_blend"},
		Source: demoOutcomes, SourceName: "the new invoices"}},
	{File: "late_risk-calibration.png", Spec: pictureSpec{Kind: "calibration", Models: []string{"late_risk"}, Source: demoOutcomes, SourceName: "the new invoices"}},
	{File: "late_blend-calibration.png", Spec: pictureSpec{Kind: "calibration", Models: []string{"late_blend"}, Source: demoOutcomes, SourceName: "the new invoices"}},
	{File: "late_risk-dependence-%s.png", Spec: pictureSpec{Kind: "dependence", Models: []string{"late_risk"}, Source: "new_invoices"}, TopFeature: true},
	{File: "late_risk-drift.png", Spec: pictureSpec{Kind: "drift", Models: []string{"late_risk"}, Source: "new_invoices"}},
	{File: "days_late-importance.png", Spec: pictureSpec{Kind: "importance", Models: []string{"days_late"}}},
}

// writeDemoPictures draws opts.Pictures into opts.PictureDir and lists the files on
// standard output, after the script's results.
func writeDemoPictures(ctx context.Context, db *sql.DB, opts *DemoOptions) error {
	if err := os.MkdirAll(opts.PictureDir, 0o755); err != nil {
		return fmt.Errorf("--pictures: %w", err)
	}
	paths := make([]string, 0, len(opts.Pictures))
	for _, pic := range opts.Pictures {
		spec, file := pic.Spec, pic.File
		if pic.TopFeature {
			top, err := queryRows(ctx, db, "SELECT feature FROM copse_importance("+sqlString(spec.Models[0])+") ORDER BY rank LIMIT 1",
				func(s scanner) (f string, err error) { return f, s.Scan(&f) })
			if err != nil {
				return fmt.Errorf("demo picture %s: most important feature of %s: %w", file, spec.Models[0], err)
			}
			if len(top) == 0 {
				return fmt.Errorf("demo picture %s: model %s has no features", file, spec.Models[0])
			}
			spec.Feature = top[0]
			file = fmt.Sprintf(file, fileSafe(top[0]))
		}
		path := filepath.Join(opts.PictureDir, file)
		p, err := drawPicture(ctx, db, spec)
		if err != nil {
			return fmt.Errorf("demo picture %s: %w", path, err)
		}
		if err := p.Save(path); err != nil {
			return fmt.Errorf("demo picture %s: %w", path, err)
		}
		paths = append(paths, path)
	}
	fmt.Fprintf(opts.IO.Out, "\nPictures of the models (see 'copse plot --help'), written to %s:\n", opts.PictureDir)
	for _, p := range paths {
		fmt.Fprintf(opts.IO.Out, "  %s\n", p)
	}
	return nil
}

// fileSafe keeps letters, digits, '-' and '_' of s for a file name; other characters
// become '_'.
func fileSafe(s string) string {
	return strings.Map(func(r rune) rune {
		if unicode.IsLetter(r) || unicode.IsDigit(r) || r == '-' || r == '_' {
			return r
		}
		return '_'
	}, s)
}

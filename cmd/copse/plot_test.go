package main

import (
	"context"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/copse-dev/copse/internal/plots"
	"github.com/copse-dev/copse/udf"
)

func TestPlotParse(t *testing.T) {
	usage := "\nRun 'copse plot --help' for usage.\n"
	tests := []struct {
		name    string
		args    []string
		want    pictureSpec
		wantErr string // "" for a good parse
	}{
		{name: "importance", args: []string{"importance", "--db", "d.duckdb", "--model", "m", "-o", "m.png"},
			want: pictureSpec{Kind: "importance", Models: []string{"m"}}},
		{name: "importance by permutation", args: []string{"importance", "--db", "d.duckdb", "--model", "m@2", "--method", "permutation", "--output", "m.SVG"},
			want: pictureSpec{Kind: "importance", Models: []string{"m@2"}, Method: "permutation"}},
		{name: "roc of two models", args: []string{"roc", "--db", "d.duckdb", "--model", "a", "--model", "b", "--source", "t", "-o", "r.svg"},
			want: pictureSpec{Kind: "roc", Models: []string{"a", "b"}, Source: "t"}},
		{name: "dependence", args: []string{"dependence", "--db", "d.duckdb", "--model", "m", "--source", "SELECT * FROM t", "--feature", "x", "-o", "d.png"},
			want: pictureSpec{Kind: "dependence", Models: []string{"m"}, Source: "SELECT * FROM t", Feature: "x"}},
		{name: "unknown kind", args: []string{"pie", "--db", "d.duckdb", "--model", "m", "-o", "p.png"},
			wantErr: `unknown picture kind "pie": want importance, curve, roc, calibration, dependence, drift`},
		{name: "no kind", args: []string{"--db", "d.duckdb"}, wantErr: "accepts 1 arg(s), received 0"},
		{name: "no db", args: []string{"curve", "--model", "m", "-o", "c.png"}, wantErr: "--db: give the database file that holds the model"},
		{name: "no model", args: []string{"curve", "--db", "d.duckdb", "-o", "c.png"}, wantErr: "--model: give the model to draw"},
		{name: "two models", args: []string{"calibration", "--db", "d.duckdb", "--model", "a", "--model", "b", "--source", "t", "-o", "c.png"},
			wantErr: "--model: calibration draws one model, got 2 (only roc compares several)"},
		{name: "roc without source", args: []string{"roc", "--db", "d.duckdb", "--model", "m", "-o", "r.png"},
			wantErr: "--source: roc scores rows: give a table, view or query with the model's inputs"},
		{name: "calibration without source", args: []string{"calibration", "--db", "d.duckdb", "--model", "m", "-o", "r.png"},
			wantErr: "--source: calibration scores rows: give a table, view or query with the model's inputs"},
		{name: "dependence without source", args: []string{"dependence", "--db", "d.duckdb", "--model", "m", "--feature", "x", "-o", "r.png"},
			wantErr: "--source: dependence scores rows: give a table, view or query with the model's inputs"},
		{name: "drift without source", args: []string{"drift", "--db", "d.duckdb", "--model", "m", "-o", "r.png"},
			wantErr: "--source: drift scores rows: give a table, view or query with the model's inputs"},
		{name: "curve with source", args: []string{"curve", "--db", "d.duckdb", "--model", "m", "--source", "t", "-o", "r.png"},
			wantErr: "--source: curve reads the model alone and takes no source"},
		{name: "dependence without feature", args: []string{"dependence", "--db", "d.duckdb", "--model", "m", "--source", "t", "-o", "r.png"},
			wantErr: "--feature: dependence needs the feature to vary"},
		{name: "feature elsewhere", args: []string{"drift", "--db", "d.duckdb", "--model", "m", "--source", "t", "--feature", "x", "-o", "r.png"},
			wantErr: "--feature: only dependence takes a feature, not drift"},
		{name: "method elsewhere", args: []string{"curve", "--db", "d.duckdb", "--model", "m", "--method", "permutation", "-o", "r.png"},
			wantErr: "--method: only importance takes a method, not curve"},
		{name: "unknown method", args: []string{"importance", "--db", "d.duckdb", "--model", "m", "--method", "gain", "-o", "r.png"},
			wantErr: `--method: unknown importance method "gain": want impurity or permutation`},
		{name: "no output", args: []string{"importance", "--db", "d.duckdb", "--model", "m"},
			wantErr: "-o: give the picture file to write (.png or .svg)"},
		{name: "unknown extension", args: []string{"importance", "--db", "d.duckdb", "--model", "m", "-o", "m.jpg"},
			wantErr: `-o: unknown picture format: "m.jpg" ends in .jpg; want .png or .svg`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d, out, errOut := testDeps("")
			var got *PlotOptions
			code := parse(d, newPlotCmd(d, func(_ context.Context, o *PlotOptions) error { got = o; return nil }), append([]string{"plot"}, tt.args...)...)
			checkOutput(t, "stdout", out, "")
			if tt.wantErr != "" {
				if code != exitUsage || got != nil {
					t.Fatalf("exit code %d (run called: %v), want %d", code, got != nil, exitUsage)
				}
				checkOutput(t, "stderr", errOut, "copse: "+tt.wantErr+usage)
				return
			}
			if code != exitOK || got == nil {
				t.Fatalf("exit code %d (stderr %q)", code, errOut.String())
			}
			p := got.Picture
			if p.Kind != tt.want.Kind || !slices.Equal(p.Models, tt.want.Models) || p.Source != tt.want.Source ||
				p.Feature != tt.want.Feature || p.Method != tt.want.Method || got.DB != "d.duckdb" {
				t.Errorf("options %+v (db %q), want %+v", p, got.DB, tt.want)
			}
		})
	}
}

// smallDemoScript trains small stand-ins, under the same names, of the models the demo
// script trains, on the first 3,000 invoices: enough for every picture, in seconds.
const smallDemoScript = `
CREATE VIEW small_training AS SELECT * FROM invoices WHERE invoice_id <= 3000 AND invoice_id % 5 <> 0;
CREATE VIEW small_blend AS SELECT * FROM invoices WHERE invoice_id <= 3000 AND invoice_id % 5 = 0;
SELECT model FROM copse_train('late_risk', 'small_training', target := 'late_30', key := 'invoice_id',
    exclude := ['days_late'], trees := 10, seed := 1);
SELECT model FROM copse_train('late_boost', 'small_training', target := 'late_30', key := 'invoice_id',
    exclude := ['days_late'], method := 'boosting', trees := 10, max_depth := 3, holdout_fraction := 0.2, seed := 1);
SELECT model FROM copse_train('late_linear', 'small_training', target := 'late_30', key := 'invoice_id',
    exclude := ['days_late'], method := 'linear');
SELECT model FROM copse_blend('late_blend', members := ['late_risk', 'late_boost', 'late_linear'],
    weights := 'fit', holdout := 'small_blend');
SELECT model FROM copse_train('days_late', 'SELECT * EXCLUDE (late_30) FROM small_training',
    target := 'days_late', key := 'invoice_id', trees := 5, seed := 1);
`

// smallDemoDB writes the demo tables and smallDemoScript's models into a database file
// and returns its path; the file is closed, ready for another command to open.
func smallDemoDB(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "demo.duckdb")
	d, _, errOut := testDeps("")
	opts := &DemoOptions{IO: d.IO, OpenHost: d.OpenHost, Interrupts: noInterrupts, DB: path, Script: smallDemoScript}
	if err := runDemo(context.Background(), opts); err != nil {
		t.Fatalf("%v (stderr %q)", err, errOut.String())
	}
	return path
}

// checkPicture checks that path is a PNG of the promised size that is not blank.
func checkPicture(t *testing.T, path string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	b := img.Bounds()
	if b.Dx() != 960 || b.Dy() != 600 { // 8 × 5 inches at 120 dots per inch
		t.Errorf("%s: %d×%d pixels, want 960×600", path, b.Dx(), b.Dy())
	}
	inked := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if r, g, bl, _ := img.At(x, y).RGBA(); r < 0xf000 || g < 0xf000 || bl < 0xf000 {
				inked++
			}
		}
	}
	// Axes, labels and data cover well over 2% of a picture.
	if total := b.Dx() * b.Dy(); inked < total/50 {
		t.Errorf("%s: %d of %d pixels are not white; want at least %d", path, inked, total, total/50)
	}
}

func TestPlotRun(t *testing.T) {
	db := smallDemoDB(t)
	dir := t.TempDir()
	outcomes := demoOutcomes
	tests := []struct {
		name string
		args []string
	}{
		{"importance", []string{"importance", "--model", "late_risk", "--method", "permutation"}},
		{"curve", []string{"curve", "--model", "late_boost"}},
		{"roc", []string{"roc", "--model", "late_risk", "--model", "late_linear", "--source", outcomes}},
		{"calibration", []string{"calibration", "--model", "late_blend", "--source", outcomes}},
		{"dependence numeric", []string{"dependence", "--model", "late_risk", "--source", "new_invoices", "--feature", "credit_use"}},
		{"dependence categorical", []string{"dependence", "--model", "days_late", "--source", "new_invoices", "--feature", "segment"}},
		{"drift", []string{"drift", "--model", "late_risk", "--source", "new_invoices"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			out := filepath.Join(dir, strings.ReplaceAll(tt.name, " ", "_")+".png")
			d, stdout, errOut := testDeps("")
			args := append([]string{"plot"}, tt.args...)
			if code := runCmd(t, d, append(args, "--db", db, "-o", out)...); code != exitOK {
				t.Fatalf("exit code %d: %s", code, errOut.String())
			}
			checkOutput(t, "stdout", stdout, "")
			checkOutput(t, "stderr", errOut, "Wrote "+out+"\n")
			checkPicture(t, out)
		})
	}

	// Failures name what is wrong and leave no picture behind.
	fails := []struct {
		name string
		args []string
		want []string // parts of the message
	}{
		{"no such model", []string{"curve", "--db", db, "--model", "nope"}, []string{"copse_curve", `"nope"`}},
		{"no such feature", []string{"dependence", "--db", db, "--model", "late_risk", "--source", "new_invoices", "--feature", "colour"},
			[]string{"copse_dependence", `"colour"`}},
		{"no such database", []string{"curve", "--db", filepath.Join(dir, "missing.duckdb"), "--model", "late_risk"}, []string{"--db:", "missing.duckdb"}},
	}
	for _, tt := range fails {
		t.Run(tt.name, func(t *testing.T) {
			out := filepath.Join(dir, "failed.png")
			d, _, errOut := testDeps("")
			if code := runCmd(t, d, append(append([]string{"plot"}, tt.args...), "-o", out)...); code != exitError {
				t.Fatalf("exit code %d, want %d (stderr %q)", code, exitError, errOut.String())
			}
			for _, w := range tt.want {
				if !strings.Contains(errOut.String(), w) {
					t.Errorf("stderr %q does not name %s", errOut.String(), w)
				}
			}
			if _, err := os.Stat(out); !os.IsNotExist(err) {
				t.Errorf("a failed run left %s (%v)", out, err)
			}
		})
	}
	if _, err := os.Stat(filepath.Join(dir, "missing.duckdb")); !os.IsNotExist(err) {
		t.Errorf("plot created the missing database file (%v)", err)
	}

	// The AUC in the ROC picture's title is the area under copse_roc's points; it must
	// equal copse_evaluate's AUC, itself checked against scikit-learn's roc_auc_score
	// in package udf. A forest of 10 trees ties many scores, so this also checks that
	// ties count half in both.
	ctx := context.Background()
	h, err := udf.Open(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	defer h.Close()
	for _, model := range []string{"late_risk", "late_boost"} {
		pts, err := queryRows(ctx, h.DB(), "SELECT threshold, true_positive_rate, false_positive_rate FROM copse_roc('"+model+"', '"+strings.ReplaceAll(outcomes, "'", "''")+"')",
			func(s scanner) (p plots.ROCPoint, err error) {
				return p, s.Scan(&p.Threshold, &p.TruePositiveRate, &p.FalsePositiveRate)
			})
		if err != nil {
			t.Fatal(err)
		}
		var auc float64
		if err := h.DB().QueryRowContext(ctx, "SELECT value FROM copse_evaluate('"+model+"', '"+strings.ReplaceAll(outcomes, "'", "''")+"') WHERE metric = 'auc'").Scan(&auc); err != nil {
			t.Fatal(err)
		}
		if got := plots.AUC(pts); math.Abs(got-auc) > 1e-9 {
			t.Errorf("%s: AUC of copse_roc's points %v, copse_evaluate's %v", model, got, auc)
		}
	}
}

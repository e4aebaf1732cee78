package plots

import (
	"bytes"
	"encoding/xml"
	"errors"
	"flag"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

var keep = flag.String("keep", "", "also write every test picture into this folder, to look at them")

// samples are one picture of each kind, drawn from small hand-made rows shaped like
// the copse_* relations' results.
func samples() map[string]func() (*Picture, error) {
	nan := math.NaN()
	return map[string]func() (*Picture, error){
		"importance": func() (*Picture, error) {
			return Importance(Labels{Title: "Feature importance of late_risk (permutation)"}, []ImportanceRow{
				{"past_late_share", 0.081, 0.004}, {"credit_use", 0.052, 0.003}, {"segment", 0.031, 0.002},
				{"tenure_months", 0.012, 0.002}, {"noise_x", -0.0004, 0.0008}, {"region", 0.002, nan},
			})
		},
		"curve": func() (*Picture, error) {
			var pts []CurvePoint
			for r := 1; r <= 60; r++ {
				pts = append(pts, CurvePoint{r, "train_loss", 0.3 + 0.4*math.Exp(-float64(r)/10)},
					CurvePoint{r, "holdout_loss", 0.35 + 0.35*math.Exp(-float64(r)/12) + 0.0005*float64(r)})
			}
			pts = append(pts, CurvePoint{61, "train_loss", nan})
			return Curve(Labels{X: "boosting round", Y: "log loss"}, pts)
		},
		"roc": func() (*Picture, error) {
			return ROC(Labels{}, ROCCurve{Name: "late_risk", Points: []ROCPoint{
				{math.Inf(1), 0, 0}, {0.9, 0.4, 0.05}, {0.7, 0.7, 0.15}, {0.5, 0.85, 0.3}, {0.3, 0.95, 0.6}, {0.1, 1, 1}}})
		},
		"roc_two": func() (*Picture, error) {
			return ROC(Labels{Title: "ROC on new invoices"},
				ROCCurve{Name: "late_risk", Points: []ROCPoint{{math.Inf(1), 0, 0}, {0.7, 0.7, 0.15}, {0.1, 1, 1}}},
				ROCCurve{Name: "late_boost", Points: []ROCPoint{{math.Inf(1), 0, 0}, {0.6, 0.8, 0.2}, {0.1, 1, 1}}})
		},
		"calibration": func() (*Picture, error) {
			bins := make([]CalibrationBin, 10)
			for b := range bins {
				p := (float64(b) + 0.5) / 10
				bins[b] = CalibrationBin{b + 1, p, p * p * 1.1, 400 - 35*b}
			}
			bins[9] = CalibrationBin{10, nan, nan, 0}
			return Calibration(Labels{}, bins)
		},
		"dependence_numeric": func() (*Picture, error) {
			var pts []DependencePoint
			for g := 0; g < 20; g++ {
				x := float64(g) / 19
				pts = append(pts, DependencePoint{fmt.Sprint(x), "true", 0.1 + 0.5*x*x})
			}
			return Dependence(Labels{X: "past_late_share"}, pts)
		},
		"dependence_categorical": func() (*Picture, error) {
			var pts []DependencePoint
			for i, lv := range []string{"construction", "healthcare", "hospitality", "public", "retail"} {
				pts = append(pts, DependencePoint{lv, "", 10 + 3*float64(i)})
			}
			return Dependence(Labels{X: "segment", Y: "average days late"}, pts)
		},
		"dependence_classes": func() (*Picture, error) {
			var pts []DependencePoint
			for i, lv := range []string{"north", "south", "islands"} {
				for k, class := range []string{"early", "on_time", "late"} {
					pts = append(pts, DependencePoint{lv, class, 0.2 + 0.1*float64(i+k)})
				}
			}
			return Dependence(Labels{}, pts)
		},
		"drift": func() (*Picture, error) {
			return Drift(Labels{}, []DriftRow{
				{"past_late_share", 0.02, "stable"}, {"credit_use", 0.14, "watch"}, {"amount", 0.41, "shifted"},
				{"segment", 0.001, "stable"}, {"(score)", 0.09, "stable"},
			})
		},
	}
}

// TestPNG draws every kind as PNG and checks that the file decodes to the promised
// size and is not blank: a real picture has many non-white pixels and more colours
// than a title on white.
func TestPNG(t *testing.T) {
	for name, draw := range samples() {
		t.Run(name, func(t *testing.T) {
			pic, err := draw()
			if err != nil {
				t.Fatal(err)
			}
			path := filepath.Join(t.TempDir(), name+".png")
			if err := pic.Save(path); err != nil {
				t.Fatal(err)
			}
			keepCopy(t, path)
			f, err := os.Open(path)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			img, err := png.Decode(f)
			if err != nil {
				t.Fatalf("%s does not decode as PNG: %v", path, err)
			}
			// 8 × 5 inches at 120 dots per inch.
			if b := img.Bounds(); b.Dx() != 960 || b.Dy() != 600 {
				t.Errorf("size %d×%d, want 960×600", b.Dx(), b.Dy())
			}
			inked, colours := ink(img)
			total := img.Bounds().Dx() * img.Bounds().Dy()
			// Axes, ticks, labels and data cover well over 2% of the picture; a blank or
			// title-only picture covers less.
			if inked < total/50 {
				t.Errorf("%d of %d pixels are not white; want at least %d", inked, total, total/50)
			}
			if colours < 16 {
				t.Errorf("%d distinct colours; want at least 16 (data colours and anti-aliased text)", colours)
			}
		})
	}
}

// ink counts img's pixels that are not white and its distinct colours.
func ink(img image.Image) (inked, colours int) {
	seen := map[color.RGBA]bool{}
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			c := color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)
			seen[c] = true
			if c.R < 0xf0 || c.G < 0xf0 || c.B < 0xf0 {
				inked++
			}
		}
	}
	return inked, len(seen)
}

// countNear counts img's pixels within tol of c in every channel.
func countNear(img image.Image, c color.Color, tol int) int {
	want := color.RGBAModel.Convert(c).(color.RGBA)
	n := 0
	b := img.Bounds()
	near := func(a, b uint8) bool { return abs(int(a)-int(b)) <= tol }
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			g := color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)
			if near(g.R, want.R) && near(g.G, want.G) && near(g.B, want.B) {
				n++
			}
		}
	}
	return n
}

func abs(x int) int { return max(x, -x) }

func keepCopy(t *testing.T, path string) {
	t.Helper()
	if *keep == "" {
		return
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(*keep, filepath.Base(path)), b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// TestSVG draws every kind as SVG and checks that it is well-formed XML whose text
// elements hold the title.
func TestSVG(t *testing.T) {
	titles := map[string]string{
		"importance":             "Feature importance of late_risk (permutation)",
		"curve":                  "Error by number of trees",
		"roc":                    "ROC curve (AUC 0.841)",
		"roc_two":                "ROC on new invoices",
		"calibration":            "Calibration",
		"dependence_numeric":     "Partial dependence",
		"dependence_categorical": "Partial dependence",
		"dependence_classes":     "Partial dependence",
		"drift":                  "Drift: population stability index",
	}
	for name, draw := range samples() {
		t.Run(name, func(t *testing.T) {
			pic, err := draw()
			if err != nil {
				t.Fatal(err)
			}
			path := filepath.Join(t.TempDir(), name+".svg")
			if err := pic.Save(path); err != nil {
				t.Fatal(err)
			}
			keepCopy(t, path)
			b, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			texts, err := svgTexts(b)
			if err != nil {
				t.Fatalf("not well-formed XML: %v", err)
			}
			want, ok := titles[name]
			if !ok {
				t.Fatalf("no title to check for %s", name)
			}
			found := false
			for _, s := range texts {
				found = found || s == want
			}
			if !found {
				t.Errorf("no <text> element %q among %q", want, texts)
			}
		})
	}
}

// svgTexts decodes doc as XML and returns the content of its text elements.
func svgTexts(doc []byte) ([]string, error) {
	d := xml.NewDecoder(bytes.NewReader(doc))
	var texts []string
	inText := false
	for {
		tok, err := d.Token()
		if errors.Is(err, io.EOF) {
			return texts, nil
		}
		if err != nil {
			return nil, err
		}
		switch tok := tok.(type) {
		case xml.StartElement:
			if tok.Name.Local == "text" {
				inText = true
				texts = append(texts, "")
			}
		case xml.EndElement:
			if tok.Name.Local == "text" {
				inText = false
			}
		case xml.CharData:
			if inText {
				texts[len(texts)-1] += string(tok)
			}
		}
	}
}

func TestAUC(t *testing.T) {
	tests := []struct {
		name   string
		points []ROCPoint
		want   float64
	}{
		// scikit-learn's roc_auc_score documentation example: y = [0, 0, 1, 1], scores
		// [0.1, 0.4, 0.35, 0.8] give 0.75; its ROC points, highest threshold first.
		{"scikit-learn example", []ROCPoint{{math.Inf(1), 0, 0}, {0.8, 0.5, 0}, {0.4, 0.5, 0.5}, {0.35, 1, 0.5}, {0.1, 1, 1}}, 0.75},
		// The same without the corners, in another order: they are added, the order sorted.
		{"corners added", []ROCPoint{{0.35, 1, 0.5}, {0.8, 0.5, 0}, {0.4, 0.5, 0.5}}, 0.75},
		{"perfect", []ROCPoint{{0.5, 1, 0}}, 1},
		{"reversed", []ROCPoint{{0.5, 0, 1}}, 0},
		// One tied score for all rows: the diagonal (common practice: ties count half).
		{"all tied", []ROCPoint{{math.Inf(1), 0, 0}, {0.3, 1, 1}}, 0.5},
	}
	for _, tt := range tests {
		if got := AUC(tt.points); math.Abs(got-tt.want) > 1e-12 {
			t.Errorf("%s: AUC %v, want %v", tt.name, got, tt.want)
		}
	}
}

// TestDriftColours checks that bars take their status's colour: a picture with a
// shifted input has far more red than one where the same input is stable (the legend
// swatch is in both).
func TestDriftColours(t *testing.T) {
	redPixels := func(status string) int {
		pic, err := Drift(Labels{}, []DriftRow{{"amount", 0.6, status}, {"segment", 0.01, "stable"}})
		if err != nil {
			t.Fatal(err)
		}
		var buf bytes.Buffer
		if err := pic.WriteTo(&buf, PNG); err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(&buf)
		if err != nil {
			t.Fatal(err)
		}
		return countNear(img, statusColours["shifted"], 8)
	}
	shifted, stable := redPixels("shifted"), redPixels("stable")
	// The bar for PSI 0.6 spans most of the plot: thousands of pixels.
	if shifted < stable+5000 {
		t.Errorf("red pixels: %d with a shifted input, %d without; want the bar's thousands more", shifted, stable)
	}
}

func TestErrors(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name string
		draw func() (*Picture, error)
		want string
	}{
		{"importance empty", func() (*Picture, error) { return Importance(Labels{}, nil) }, "plots: importance: no features to draw"},
		{"importance NaN", func() (*Picture, error) { return Importance(Labels{}, []ImportanceRow{{"x", nan, nan}}) }, `plots: importance: feature "x" has importance NaN`},
		{"curve all NaN", func() (*Picture, error) { return Curve(Labels{}, []CurvePoint{{1, "error", nan}}) }, "plots: curve: no finite values to draw"},
		{"roc none", func() (*Picture, error) { return ROC(Labels{}) }, "plots: roc: no curves to draw"},
		{"roc empty", func() (*Picture, error) { return ROC(Labels{}, ROCCurve{Name: "m"}) }, `plots: roc: curve "m" has no points`},
		{"calibration empty", func() (*Picture, error) { return Calibration(Labels{}, []CalibrationBin{{1, nan, nan, 0}}) }, "plots: calibration: every bin is empty"},
		{"dependence empty", func() (*Picture, error) { return Dependence(Labels{}, nil) }, "plots: dependence: no points to draw"},
		{"drift empty", func() (*Picture, error) { return Drift(Labels{}, nil) }, "plots: drift: no inputs to draw"},
	}
	for _, tt := range tests {
		_, err := tt.draw()
		if err == nil || err.Error() != tt.want {
			t.Errorf("%s: error %v, want %q", tt.name, err, tt.want)
		}
	}
}

func TestFormatOf(t *testing.T) {
	tests := []struct {
		path string
		want Format
		err  string
	}{
		{"a.png", PNG, ""},
		{"dir/B.SVG", SVG, ""},
		{"a.jpg", "", `plots: unknown picture format: "a.jpg" ends in .jpg; want .png or .svg`},
		{"picture", "", `plots: unknown picture format: "picture" has no extension; want .png or .svg`},
	}
	for _, tt := range tests {
		got, err := FormatOf(tt.path)
		if tt.err != "" {
			if err == nil || err.Error() != tt.err || !errors.Is(err, ErrFormat) {
				t.Errorf("%s: error %v, want %q", tt.path, err, tt.err)
			}
			continue
		}
		if err != nil || got != tt.want {
			t.Errorf("%s: %q, %v; want %q", tt.path, got, err, tt.want)
		}
	}
	// A failed save leaves no file behind.
	pic, err := Drift(Labels{}, []DriftRow{{"x", 0.1, "watch"}})
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "x.gif")
	if err := pic.Save(path); err == nil || !strings.Contains(err.Error(), ".gif") {
		t.Errorf("save as .gif: error %v, want one naming .gif", err)
	}
	if _, err := os.Stat(path); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("save as .gif left %s behind (%v)", path, err)
	}
}

func TestTicks(t *testing.T) {
	tests := []struct {
		lo, hi float64
		want   []string // labelled ticks
	}{
		{0, 1, []string{"0.0", "0.2", "0.4", "0.6", "0.8", "1.0"}},
		{0.13, 0.47, []string{"0.15", "0.20", "0.25", "0.30", "0.35", "0.40", "0.45"}},
		{-3, 27, []string{"0", "5", "10", "15", "20", "25"}},
		{-0.0006, 0.0479, []string{"0.00", "0.01", "0.02", "0.03", "0.04"}},
	}
	for _, tt := range tests {
		var got []string
		for _, tk := range (ticks{}).Ticks(tt.lo, tt.hi) {
			if tk.Value < tt.lo || tk.Value > tt.hi {
				t.Errorf("[%v, %v]: tick %v outside the range", tt.lo, tt.hi, tk.Value)
			}
			if tk.Label != "" {
				got = append(got, tk.Label)
			}
		}
		if fmt.Sprint(got) != fmt.Sprint(tt.want) {
			t.Errorf("[%v, %v]: labels %q, want %q", tt.lo, tt.hi, got, tt.want)
		}
	}
}

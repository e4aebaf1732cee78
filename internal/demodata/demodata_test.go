package demodata

import (
	"math"
	"reflect"
	"testing"
)

func TestGenerateDeterministic(t *testing.T) {
	a := Generate(DefaultSeed, 1, 500)
	b := Generate(DefaultSeed, 1, 500)
	if !reflect.DeepEqual(a, b) {
		t.Fatal("same seed gave different rows")
	}
	c := Generate(DefaultSeed+1, 1, 500)
	if reflect.DeepEqual(a, c) {
		t.Fatal("another seed gave the same rows")
	}
}

func TestGenerateShape(t *testing.T) {
	rows := Generate(DefaultSeed, 1, TrainRows)
	late, nullPast, nullCredit := 0, 0, 0
	for i := range rows {
		inv := &rows[i]
		if inv.ID != int64(1+i) {
			t.Fatalf("row %d: id %d", i, inv.ID)
		}
		if inv.Late30 != (inv.DaysLate > 30) || inv.DaysLate < 0 {
			t.Fatalf("row %d: days_late %d, late_30 %v", i, inv.DaysLate, inv.Late30)
		}
		if inv.TenureMonths < 1 || inv.TenureMonths > 180 || inv.Amount < 50 {
			t.Fatalf("row %d out of range: %+v", i, inv)
		}
		if inv.Late30 {
			late++
		}
		if inv.PastLateShare == nil {
			nullPast++
		}
		if inv.CreditUse == nil {
			nullCredit++
		}
	}
	// The demo reads best with a minority class of a fifth to a third, and some NULLs
	// in both columns that allow them.
	if share := float64(late) / float64(len(rows)); share < 0.15 || share > 0.35 {
		t.Errorf("late share %.3f, want 0.15–0.35", share)
	}
	if nullPast == 0 || nullCredit == 0 {
		t.Errorf("NULLs: past_late_share %d, credit_use %d; want some of each", nullPast, nullCredit)
	}
}

func TestDictionaryCoversFeatures(t *testing.T) {
	all := append(append(append([]string{}, StrongDrivers...), WeakDrivers...), NoiseFeatures...)
	if len(all) != len(Dictionary) {
		t.Fatalf("%d features in the ground truth lists, %d in the dictionary", len(all), len(Dictionary))
	}
	names := map[string]bool{}
	for _, f := range Dictionary {
		names[f.Name] = true
	}
	for _, f := range all {
		if !names[f] {
			t.Errorf("feature %q missing from the dictionary", f)
		}
	}
}

// TestLatentMatchesDocumentedRule pins the coefficients written in the package
// documentation, the README and sql/demo.sql.
func TestLatentMatchesDocumentedRule(t *testing.T) {
	pls, cu := 0.45, 0.80
	inv := Invoice{PastLateShare: &pls, CreditUse: &cu, OpenInvoices: 7, TermsDays: 45, TenureMonths: 18,
		Segment: "construction", Amount: 2000 * math.E, Region: "islands", Channel: "web"}
	want := 3.0*0.20 + 2.5*0.20 + 0.25*2 + 0.03*15 + 1.2*math.Exp(-1) + 0.9 + 0.15 + 0.2 + 0.1
	if got := Latent(&inv); math.Abs(got-want) > 1e-12 {
		t.Errorf("Latent = %v, want %v", got, want)
	}
	// Missing values take the fill-ins; healthcare lowers the score.
	inv = Invoice{OpenInvoices: 5, TermsDays: 30, TenureMonths: 180, Segment: "healthcare", Amount: 2000, Region: "north", Channel: "edi"}
	want = 3.0*(0.35-0.25) + 0 + 0 + 0 + 1.2*math.Exp(-10) - 0.45
	if got := Latent(&inv); math.Abs(got-want) > 1e-12 {
		t.Errorf("Latent with NULLs = %v, want %v", got, want)
	}
}

package demodata

import (
	"math"
	"math/rand/v2"
	"time"
)

// DefaultSeed is the seed of the demo's data; any other seed gives another data set
// drawn from the same rule.
const DefaultSeed = 20260101

// Sizes of the demo tables: large enough for a stable forest, small enough that the
// whole demo runs in a few seconds on two cores.
const (
	TrainRows = 20000
	NewRows   = 5000
)

// Categorical levels, in the order they are drawn.
var (
	Segments = []string{"retail", "hospitality", "construction", "healthcare", "public"}
	Regions  = []string{"north", "south", "east", "west", "islands"}
	Channels = []string{"sales_rep", "web", "edi"}
	Tags     = []string{"t1", "t2", "t3", "t4", "t5", "t6"}
	Terms    = []int{15, 30, 45, 60}
)

var (
	segmentWeights = []float64{0.35, 0.20, 0.20, 0.15, 0.10}
	regionWeights  = []float64{0.25, 0.25, 0.20, 0.22, 0.08}
	channelWeights = []float64{0.45, 0.35, 0.20}
	termsWeights   = []float64{0.15, 0.50, 0.20, 0.15}
	segmentEffect  = map[string]float64{"construction": 0.9, "public": 0.6, "hospitality": 0.45, "retail": 0, "healthcare": -0.45}
)

// Fill-ins used by the ground truth for missing values.
const (
	PastLateFill  = 0.35
	CreditUseFill = 0.60
)

// Invoice is one generated row. Pointer fields are NULL when nil.
type Invoice struct {
	ID            int64
	Date          time.Time // a day in 2025 (UTC); no effect on lateness
	Amount        float64   // invoice amount in the distributor's currency
	TermsDays     int       // payment terms: 15, 30, 45 or 60 days
	Segment       string
	Region        string
	Channel       string
	TenureMonths  int      // months since the customer's first order, 1–180
	PastLateShare *float64 // share of the customer's past invoices paid > 30 days late; nil for customers with little history
	OpenInvoices  int      // the customer's unpaid invoices when this one was issued
	CreditUse     *float64 // balance over credit limit (may exceed 1); nil when no limit is on file
	NoiseX        float64  // uniform on [0, 1); pure noise
	NoiseTag      string   // random label; pure noise
	Z             float64  // the latent score of the ground truth
	DaysLate      int      // days paid after the due date
	Late30        bool     // DaysLate > 30
}

// Generate draws n invoices with IDs first, first+1, … from seed. The same arguments
// always give the same rows.
func Generate(seed uint64, first int64, n int) []Invoice {
	r := rand.New(rand.NewPCG(seed, uint64(first)))
	start := time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)
	out := make([]Invoice, n)
	for i := range out {
		inv := &out[i]
		inv.ID = first + int64(i)
		inv.Date = start.AddDate(0, 0, r.IntN(365))
		inv.Segment = Segments[pick(r, segmentWeights)]
		inv.Region = Regions[pick(r, regionWeights)]
		inv.Channel = Channels[pick(r, channelWeights)]
		inv.TermsDays = Terms[pick(r, termsWeights)]
		inv.TenureMonths = 1 + int(math.Min(179, r.ExpFloat64()*40))
		inv.Amount = math.Round(math.Exp(math.Log(2000)+1.0*r.NormFloat64())*100) / 100
		if inv.Amount < 50 {
			inv.Amount = 50
		}
		inv.OpenInvoices = poisson(r, 4)
		if inv.TenureMonths > 3 && r.Float64() > 0.05 {
			v := round3(beta(r, 2, 6))
			inv.PastLateShare = &v
		}
		if r.Float64() > 0.04 {
			v := round3(math.Max(0, math.Min(1.3, 0.55+0.25*r.NormFloat64())))
			inv.CreditUse = &v
		}
		inv.NoiseX = round3(r.Float64())
		inv.NoiseTag = Tags[r.IntN(len(Tags))]
		inv.Z = Latent(inv)
		days := math.Round(14 + 12*inv.Z + 9*r.NormFloat64())
		inv.DaysLate = int(math.Max(0, days))
		inv.Late30 = inv.DaysLate > 30
	}
	return out
}

// Latent is the ground truth's score z for inv (see the package documentation).
func Latent(inv *Invoice) float64 {
	pls := PastLateFill
	if inv.PastLateShare != nil {
		pls = *inv.PastLateShare
	}
	cu := CreditUseFill
	if inv.CreditUse != nil {
		cu = *inv.CreditUse
	}
	z := 3.0*(pls-0.25) +
		2.5*(cu-0.60) +
		0.25*float64(inv.OpenInvoices-5) +
		0.03*float64(inv.TermsDays-30) +
		1.2*math.Exp(-float64(inv.TenureMonths)/18) +
		segmentEffect[inv.Segment] +
		0.15*math.Log(inv.Amount/2000)
	if inv.Region == "islands" {
		z += 0.2
	}
	if inv.Channel == "web" {
		z += 0.1
	}
	return z
}

// StrongDrivers are the features with a large effect in the ground truth.
var StrongDrivers = []string{"past_late_share", "credit_use", "open_invoices", "tenure_months", "terms_days", "segment"}

// WeakDrivers matter a little.
var WeakDrivers = []string{"amount", "region", "channel"}

// NoiseFeatures do not enter the ground truth at all.
var NoiseFeatures = []string{"invoice_date", "noise_x", "noise_tag"}

// Feature describes one column for the demo's feature dictionary.
type Feature struct {
	Name, Description, Owner string
}

// Dictionary is the demo's feature dictionary, in table order.
var Dictionary = []Feature{
	{"invoice_date", "day the invoice was issued", "billing"},
	{"amount", "invoice amount, currency units", "billing"},
	{"terms_days", "agreed payment terms in days", "sales"},
	{"segment", "customer's line of business", "sales"},
	{"region", "delivery region", "logistics"},
	{"channel", "how the order came in", "sales"},
	{"tenure_months", "months since the customer's first order", "credit control"},
	{"past_late_share", "share of past invoices paid over 30 days late", "credit control"},
	{"open_invoices", "customer's unpaid invoices at issue", "credit control"},
	{"credit_use", "balance over credit limit", "credit control"},
	{"noise_x", "random number (a check: should not matter)", "data team"},
	{"noise_tag", "random label (a check: should not matter)", "data team"},
}

func pick(r *rand.Rand, weights []float64) int {
	u := r.Float64()
	for i, w := range weights {
		if u < w {
			return i
		}
		u -= w
	}
	return len(weights) - 1
}

func poisson(r *rand.Rand, mean float64) int {
	// Knuth's multiplication method: fine for small means.
	l, k, p := math.Exp(-mean), 0, 1.0
	for {
		p *= r.Float64()
		if p <= l {
			return k
		}
		k++
	}
}

// beta draws Beta(a, b) for integer a, b as a ratio of gamma draws (sums of
// exponentials).
func beta(r *rand.Rand, a, b int) float64 {
	x, y := 0.0, 0.0
	for range a {
		x += r.ExpFloat64()
	}
	for range b {
		y += r.ExpFloat64()
	}
	return x / (x + y)
}

func round3(v float64) float64 { return math.Round(v*1000) / 1000 }

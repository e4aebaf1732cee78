// Package demodata generates the invented data set of `copse demo`: invoices of a
// fictional wholesale distributor, with a known rule deciding how late each one is paid.
//
// Everything here is made up and pure Go: the same seed always gives the same rows, on
// any machine. There is no real customer, company or invoice behind any row.
//
// # Ground truth
//
// Each invoice gets a latent lateness score z from its attributes (missing values are
// replaced by the stated fill-ins before the formula; the table keeps them missing):
//
//	z =   3.0 · (past_late_share − 0.25)          fill-in 0.35 when NULL
//	    + 2.5 · (credit_use − 0.60)               fill-in 0.60 when NULL
//	    + 0.25 · (open_invoices − 5)
//	    + 0.03 · (terms_days − 30)
//	    + 1.2 · exp(−tenure_months / 18)
//	    + segment effect: construction +0.9, public +0.6, hospitality +0.45,
//	                      retail 0, healthcare −0.45
//	    + 0.15 · ln(amount / 2000)
//	    + 0.2 when region = 'islands'
//	    + 0.1 when channel = 'web'
//
// The days the invoice is paid after its due date are
//
//	days_late = max(0, round(14 + 12·z + 9·ε)),   ε ~ N(0, 1)
//
// and the classification target is late_30 = days_late > 30.
//
// The strong drivers are past_late_share, credit_use, open_invoices, tenure_months,
// terms_days and segment; amount, region and channel matter a little; invoice_date,
// noise_x (a uniform number) and noise_tag (a random label) do not matter at all.
package demodata

package plots

import (
	"fmt"
	"image/color"
)

// The population stability index thresholds drawn on drift pictures: below WatchPSI
// a distribution counts as stable, from ShiftedPSI as shifted (common practice in
// credit scoring; copse_drift's status uses the same).
const (
	WatchPSI   = 0.10
	ShiftedPSI = 0.25
)

// DriftRow is one input's population stability index, as copse_drift returns it.
type DriftRow struct {
	Feature string
	PSI     float64 // NaN when it could not be computed
	Status  string  // "stable", "watch" or "shifted"
}

// Status colours: green, amber, red, as traffic lights; an unknown status is grey.
var statusColours = map[string]color.Color{
	"stable":  color.RGBA{R: 0x3a, G: 0x9a, B: 0x4a, A: 0xff},
	"watch":   color.RGBA{R: 0xe0, G: 0xa0, B: 0x10, A: 0xff},
	"shifted": color.RGBA{R: 0xc6, G: 0x2e, B: 0x2e, A: 0xff},
}

// Drift draws a horizontal bar per input (in the given order, first on top) coloured
// by its status, with the PSI and status at its end and the WatchPSI and ShiftedPSI
// thresholds as dashed lines.
func Drift(l Labels, rows []DriftRow) (*Picture, error) {
	if len(rows) == 0 {
		return nil, fmt.Errorf("plots: drift: no inputs to draw")
	}
	l = l.or(Labels{Title: "Drift: population stability index", X: "population stability index (PSI)"})
	if len(rows) > MaxBars {
		l.Title = fmt.Sprintf("%s (first %d of %d)", l.Title, MaxBars, len(rows))
		rows = rows[:MaxBars]
	}
	b := &hbars{values: make([]float64, len(rows)), colours: make([]color.Color, len(rows)), notes: make([]string, len(rows))}
	names := make([]string, len(rows))
	for i, r := range rows {
		names[i] = r.Feature
		b.values[i] = r.PSI
		c, ok := statusColours[r.Status]
		if !ok {
			c = palette[5]
		}
		b.colours[i] = c
		if finite(r.PSI) {
			b.notes[i] = fmt.Sprintf("%.3f %s", r.PSI, r.Status)
		} else {
			b.notes[i] = "no value " + r.Status
		}
	}
	p := newPlot(l)
	p.Add(b)
	top := float64(len(rows)) - 0.5
	watch := guide(WatchPSI, -0.5, WatchPSI, top, statusColours["watch"])
	shifted := guide(ShiftedPSI, -0.5, ShiftedPSI, top, statusColours["shifted"])
	p.Add(watch, shifted)
	p.X.Max = max(p.X.Max, ShiftedPSI*1.3) // both thresholds always in view
	p.Legend.Add("stable", swatch{statusColours["stable"]})
	p.Legend.Add(fmt.Sprintf("watch (from %.2f)", WatchPSI), swatch{statusColours["watch"]}, watch)
	p.Legend.Add(fmt.Sprintf("shifted (from %.2f)", ShiftedPSI), swatch{statusColours["shifted"]}, shifted)
	p.NominalY(rowNames(names)...)
	p.Y.Min, p.Y.Max = -0.5, top
	return &Picture{p: p}, nil
}

package sqlrun

import (
	"context"
	"fmt"
	"io"
	"strings"
	"time"

	"github.com/mattn/go-runewidth"
)

// Job is what the progress bar needs to know about one running training.
type Job struct {
	Model     string
	Stage     string // "reading", "training", "saving"
	TreesDone int
	Trees     int
	Started   time.Time
}

// Progress draws a one-line training progress bar on a terminal while a statement runs.
// Its Watch method is meant for [Runner.Watch].
type Progress struct {
	Jobs  func() []Job // the running trainings, oldest first
	W     io.Writer    // a terminal: the bar is redrawn in place with a carriage return
	Every time.Duration
	Now   func() time.Time // nil means time.Now
	// Width is the terminal's width in columns; a longer line is cut to fit, since a
	// wrapped line cannot be redrawn in place. 0 means no limit.
	Width int
}

// progressEvery is how often the bar is redrawn: often enough to look alive, rarely
// enough to cost nothing.
const progressEvery = 200 * time.Millisecond

// barWidth is the number of cells in the bar itself.
const barWidth = 24

// Watch redraws the bar until ctx is done, then erases it.
func (p *Progress) Watch(ctx context.Context) {
	every := p.Every
	if every <= 0 {
		every = progressEvery
	}
	now := p.Now
	if now == nil {
		now = time.Now
	}
	t := time.NewTicker(every)
	defer t.Stop()
	drawn := false
	for {
		select {
		case <-ctx.Done():
			if drawn {
				fmt.Fprint(p.W, "\r\x1b[K")
			}
			return
		case <-t.C:
			if line := ProgressLine(p.Jobs(), now()); line != "" {
				if p.Width > 1 {
					line = runewidth.Truncate(line, p.Width-1, "")
				}
				fmt.Fprint(p.W, "\r"+line+"\x1b[K")
				drawn = true
			} else if drawn {
				fmt.Fprint(p.W, "\r\x1b[K")
				drawn = false
			}
		}
	}
}

// ProgressLine describes the oldest running training at time now, or returns "" when
// none is running:
//
//	training late_30 [#########...............]  38/100 trees  0:04 elapsed  0:06 left
//
// The time left assumes the remaining trees take as long as the finished ones did.
func ProgressLine(jobs []Job, now time.Time) string {
	if len(jobs) == 0 {
		return ""
	}
	j := jobs[0]
	elapsed := now.Sub(j.Started)
	var b strings.Builder
	fmt.Fprintf(&b, "training %s ", j.Model)
	switch {
	case j.Stage != "" && j.Stage != "training":
		fmt.Fprintf(&b, "(%s) ", j.Stage)
	case j.Trees > 0 && j.TreesDone >= j.Trees:
		b.WriteString("(finishing) ") // out-of-bag results and importance come after the trees
	}
	filled := 0
	if j.Trees > 0 {
		filled = min(barWidth, j.TreesDone*barWidth/j.Trees)
	}
	b.WriteString("[" + strings.Repeat("#", filled) + strings.Repeat(".", barWidth-filled) + "]")
	fmt.Fprintf(&b, "  %d/%d trees  %s elapsed", j.TreesDone, j.Trees, clock(elapsed))
	if j.TreesDone > 0 && j.TreesDone < j.Trees {
		left := time.Duration(float64(elapsed) / float64(j.TreesDone) * float64(j.Trees-j.TreesDone))
		fmt.Fprintf(&b, "  %s left", clock(left))
	}
	if len(jobs) > 1 {
		fmt.Fprintf(&b, "  (+%d more)", len(jobs)-1)
	}
	return b.String()
}

// clock writes d as m:ss, or h:mm:ss past an hour.
func clock(d time.Duration) string {
	s := int(d.Round(time.Second) / time.Second)
	if s < 0 {
		s = 0
	}
	if s >= 3600 {
		return fmt.Sprintf("%d:%02d:%02d", s/3600, s/60%60, s%60)
	}
	return fmt.Sprintf("%d:%02d", s/60, s%60)
}

package udf

import (
	"math"
	"sync"
	"time"
)

var nan = math.NaN()

// Job is a training in progress, as copse_jobs lists it.
type Job struct {
	ID        int64
	Model     string
	Method    string
	Stage     string // "reading", "training", "out-of-bag", "saving"
	TreesDone int
	Trees     int
	Started   time.Time
}

// jobTable tracks running trainings so that another connection (or the command's
// progress bar) can watch them.
type jobTable struct {
	mu   sync.Mutex
	next int64
	jobs map[int64]*Job
}

func (t *jobTable) start(model, method string, trees int) int64 {
	t.mu.Lock()
	defer t.mu.Unlock()
	if t.jobs == nil {
		t.jobs = map[int64]*Job{}
	}
	t.next++
	t.jobs[t.next] = &Job{ID: t.next, Model: model, Method: method, Stage: "reading", Trees: trees, Started: time.Now()}
	return t.next
}

func (t *jobTable) update(id int64, f func(*Job)) {
	t.mu.Lock()
	defer t.mu.Unlock()
	if j := t.jobs[id]; j != nil {
		f(j)
	}
}

func (t *jobTable) finish(id int64) {
	t.mu.Lock()
	defer t.mu.Unlock()
	delete(t.jobs, id)
}

// Jobs returns a snapshot of the running trainings, oldest first.
func (h *Host) Jobs() []Job {
	h.jobs.mu.Lock()
	defer h.jobs.mu.Unlock()
	out := make([]Job, 0, len(h.jobs.jobs))
	for id := int64(1); id <= h.jobs.next; id++ {
		if j := h.jobs.jobs[id]; j != nil {
			out = append(out, *j)
		}
	}
	return out
}

package server

import (
	"sync"

	"google.golang.org/protobuf/proto"

	frustumv1 "frustum/proto/frustum/v1"
)

// hub passes state changes and progress of jobs to the WatchJob streams
// that follow them. Publishing never blocks: a watcher keeps every state
// change (a job has a handful per attempt) and only the latest progress.
type hub struct {
	mu   sync.Mutex
	subs map[string]map[*watcher]struct{}
}

// watcher is one stream's mailbox.
type watcher struct {
	notify chan struct{} // capacity 1: "something is pending"

	mu       sync.Mutex
	jobs     []*frustumv1.Job // state changes not yet sent, oldest first
	progress *frustumv1.JobProgress
}

func newHub() *hub { return &hub{subs: map[string]map[*watcher]struct{}{}} }

func (h *hub) subscribe(name string) *watcher {
	w := &watcher{notify: make(chan struct{}, 1)}
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.subs[name] == nil {
		h.subs[name] = map[*watcher]struct{}{}
	}
	h.subs[name][w] = struct{}{}
	return w
}

func (h *hub) unsubscribe(name string, w *watcher) {
	h.mu.Lock()
	defer h.mu.Unlock()
	delete(h.subs[name], w)
	if len(h.subs[name]) == 0 {
		delete(h.subs, name)
	}
}

// each calls f for every watcher of name, under the hub's lock.
func (h *hub) each(name string, f func(*watcher)) {
	h.mu.Lock()
	defer h.mu.Unlock()
	for w := range h.subs[name] {
		f(w)
		select {
		case w.notify <- struct{}{}:
		default:
		}
	}
}

// publishJob passes a new state of a job (as stored) to its watchers.
func (h *hub) publishJob(job *frustumv1.Job) {
	if job == nil {
		return
	}
	snap := watchView(job)
	h.each(job.GetName(), func(w *watcher) {
		w.mu.Lock()
		w.jobs = append(w.jobs, snap)
		w.mu.Unlock()
	})
}

// publishProgress passes the latest progress of a running job.
func (h *hub) publishProgress(name string, p *frustumv1.JobProgress) {
	h.each(name, func(w *watcher) {
		w.mu.Lock()
		w.progress = p
		w.mu.Unlock()
	})
}

// take returns the pending state changes and the latest progress, and
// clears both.
func (w *watcher) take() ([]*frustumv1.Job, *frustumv1.JobProgress) {
	w.mu.Lock()
	defer w.mu.Unlock()
	jobs, p := w.jobs, w.progress
	w.jobs, w.progress = nil, nil
	return jobs, p
}

// putBackProgress keeps p pending unless a newer progress arrived.
func (w *watcher) putBackProgress(p *frustumv1.JobProgress) {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.progress == nil {
		w.progress = p
	}
}

// watchView returns a copy of job without spec and result, as lists and
// watches show it. Published snapshots are never modified afterwards.
func watchView(job *frustumv1.Job) *frustumv1.Job {
	out := proto.Clone(job).(*frustumv1.Job)
	out.Spec = nil
	out.Result = nil
	return out
}

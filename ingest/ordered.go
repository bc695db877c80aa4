package ingest

import "sync"

// ordered runs tasks on several workers and hands their results on in the
// order of the tasks: the Parquet bulk path (a task is a row group) and
// the parallel CSV path (a task is a chunk) both read this way.
type ordered[R any] struct {
	futures chan chan R // one per task, in task order
	stop    chan struct{}
	wg      sync.WaitGroup
}

// startOrdered starts produce, which passes each task to emit in order
// until emit returns false (the reader is closing), and workers goroutines,
// each with the work function and cleanup newWorker gives it; a worker's
// work may watch stop to end early.
func startOrdered[T, R any](workers int, produce func(emit func(T) bool),
	newWorker func(stop <-chan struct{}) (work func(T) R, done func())) *ordered[R] {
	o := &ordered[R]{futures: make(chan chan R, 2*workers), stop: make(chan struct{})}
	type task struct {
		t   T
		out chan R
	}
	tasks := make(chan task, workers)
	o.wg.Add(1 + workers)
	go func() {
		defer o.wg.Done()
		defer close(tasks)
		defer close(o.futures)
		produce(func(t T) bool {
			out := make(chan R, 1)
			select {
			case o.futures <- out:
			case <-o.stop:
				return false
			}
			select {
			case tasks <- task{t: t, out: out}:
			case <-o.stop:
				return false
			}
			return true
		})
	}()
	for range workers {
		go func() {
			defer o.wg.Done()
			work, done := newWorker(o.stop)
			defer done()
			for t := range tasks {
				t.out <- work(t.t) // never blocks: the channel holds one
			}
		}()
	}
	return o
}

// next waits for the next task's result; false after the last.
func (o *ordered[R]) next() (R, bool) {
	out, ok := <-o.futures
	if !ok {
		var none R
		return none, false
	}
	return <-out, true
}

// close stops the producer and the workers, waits for them, and passes
// each result made but not taken to release.
func (o *ordered[R]) close(release func(R)) {
	close(o.stop)
	o.wg.Wait()
	for out := range o.futures {
		if len(out) > 0 {
			release(<-out)
		}
	}
}

package store

import (
	"testing"

	frustumv1 "frustum/proto/frustum/v1"
)

// BenchmarkCreate is one durable create: one bbolt read-write transaction
// with an fsync (fdatasync on Linux) of the file, the cost that every job
// transition (create, start, progress stored, result, cancel) pays.
func BenchmarkCreate(b *testing.B) {
	s, _ := openTemp(b)
	job := queued("usera", "")
	for b.Loop() {
		if _, _, err := s.Create(job); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkCreateParallel is creates from many goroutines; bbolt runs one
// writer at a time, so this shows the serialized throughput.
func BenchmarkCreateParallel(b *testing.B) {
	s, _ := openTemp(b)
	b.RunParallel(func(pb *testing.PB) {
		job := queued("usera", "")
		for pb.Next() {
			if _, _, err := s.Create(job); err != nil {
				b.Error(err)
				return
			}
		}
	})
}

// BenchmarkUpdate is one state transition of a stored job.
func BenchmarkUpdate(b *testing.B) {
	s, _ := openTemp(b)
	job := mustCreate(b, s, queued("usera", ""))
	for b.Loop() {
		if _, err := s.Update(job.Name, func(j *frustumv1.Job) error {
			j.Attempts++
			return nil
		}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkGet is one read of a job (no fsync).
func BenchmarkGet(b *testing.B) {
	s, _ := openTemp(b)
	job := mustCreate(b, s, queued("usera", ""))
	for b.Loop() {
		if _, err := s.Get(job.Name); err != nil {
			b.Fatal(err)
		}
	}
}

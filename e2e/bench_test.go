package e2e

import (
	"context"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// seq makes every benchmark spec differ from every earlier one, so that
// no job is answered from the stored result of another.
var seq atomic.Int64

// BenchmarkSubmitToResultMultimer measures, on loopback, the time from
// CreateJob to the result in hand (CreateJob, WatchJob to SUCCEEDED, GetJob
// with the result) of a 7-site multimer magnetization job of 5
// temperatures and 301 fields, against the engine's own time for the same
// spec in this process (tasks.Run, not counted in ns/op). It reports
// ms/op (the submit-to-result latency), engine-ms and overhead-ms, the
// latency above the engine's time. JDefect changes a little at every
// iteration so that the server's cache never answers.
func BenchmarkSubmitToResultMultimer(b *testing.B) {
	d := startDaemon(b, b.TempDir(), 0)
	opt := engineOptions(0)
	ctx := context.Background()
	var latency, engine time.Duration
	n := 0
	for b.Loop() {
		spec := multimerSpec(0.5 + 1e-7*float64(seq.Add(1)))
		t0 := time.Now()
		created, err := d.jobs.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec})
		if err != nil {
			b.Fatal(err)
		}
		job := created
		if !terminal(created.GetState()) {
			if job, _, err = waitTerminal(ctx, d.jobs, created.GetName()); err != nil {
				b.Fatal(err)
			}
		}
		latency += time.Since(t0)
		if job.GetState() != frustumv1.Job_SUCCEEDED || job.GetMagnetizationResult() == nil {
			b.Fatalf("%s: %s without a magnetization result (error %v)", job.GetName(), job.GetState(), job.GetError())
		}
		if job.GetFromCache() {
			b.Fatalf("%s: answered from the cache; the specs must differ", job.GetName())
		}

		b.StopTimer()
		t1 := time.Now()
		if _, err := tasks.Run(ctx, spec, opt); err != nil {
			b.Fatal(err)
		}
		engine += time.Since(t1)
		n++
		b.StartTimer()
	}
	perOp := func(t time.Duration) float64 { return t.Seconds() * 1e3 / float64(n) }
	b.ReportMetric(perOp(latency), "ms/op")
	b.ReportMetric(perOp(engine), "engine-ms")
	b.ReportMetric(perOp(latency-engine), "overhead-ms")
}

// BenchmarkSmallJobsPerSecond measures the throughput of small jobs
// (dimers, triangles, 4-site chains, all different) through one frustumd
// with one worker slot per core, submitted by several concurrent clients,
// each on its own connection, each waiting for the result of one job
// before it submits the next. It reports jobs/s.
func BenchmarkSmallJobsPerSecond(b *testing.B) {
	d := startDaemon(b, b.TempDir(), 0)
	b.SetParallelism(4) // 4 submitters per GOMAXPROCS
	b.ResetTimer()
	b.RunParallel(func(pb *testing.PB) {
		conn, err := grpc.NewClient(d.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			b.Error(err)
			return
		}
		defer conn.Close()
		jc := frustumv1.NewJobServiceClient(conn)
		ctx := context.Background()
		for pb.Next() {
			created, err := jc.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: smallSpec(int(seq.Add(1)))})
			if err != nil {
				b.Error(err)
				return
			}
			job := created
			if !terminal(created.GetState()) {
				if job, _, err = waitTerminal(ctx, jc, created.GetName()); err != nil {
					b.Error(err)
					return
				}
			}
			if job.GetState() != frustumv1.Job_SUCCEEDED || job.GetResult() == nil {
				b.Errorf("%s: %s without a result (error %v)", job.GetName(), job.GetState(), job.GetError())
				return
			}
		}
	})
	b.StopTimer()
	if s := b.Elapsed().Seconds(); s > 0 {
		b.ReportMetric(float64(b.N)/s, "jobs/s")
	}
}

package server

import (
	"bytes"
	"context"
	"slices"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// fitSpec is a fit of a DM chain's polarization, made from the chain's own
// magnetization (so that the fit has a well-defined optimum), with its
// exchange varied.
func fitSpec(t *testing.T) *frustumv1.JobSpec {
	t.Helper()
	c := dmChain(4, 10)
	temps := []float64{2, 4}
	mag, err := tasks.Magnetization(context.Background(), c, &frustumv1.MagnetizationParameters{Temperatures: temps, Fields: fields(6)}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	d := &frustumv1.MeasuredData{Name: "made from the chain", ValueUnit: "1"}
	for _, curve := range mag.GetCurves() {
		for i, B := range mag.GetField() {
			if B == 0 {
				continue
			}
			d.Temperature = append(d.Temperature, curve.GetTemperature())
			d.Field = append(d.Field, B)
			d.Value = append(d.Value, 2*curve.GetMagnetization()[i]/mag.GetSaturation()+0.1)
			d.Sigma = append(d.Sigma, 0.01)
		}
	}
	start := proto.Clone(c).(*frustumv1.Cluster)
	for _, b := range start.Bonds {
		b.Exchange = proto.Float64(8)
	}
	var paths []string
	for i := range start.Bonds {
		paths = append(paths, "bonds["+string(rune('0'+i))+"].exchange")
	}
	return &frustumv1.JobSpec{Task: &frustumv1.JobSpec_Fit{Fit: &frustumv1.FitParameters{
		Data: d, Models: []*frustumv1.Cluster{start}, Observable: "polarization",
		Vary: []*frustumv1.FitParameter{{Name: "J", Paths: paths, Min: proto.Float64(0), Max: proto.Float64(30)}},
	}}}
}

// A fit runs as a job: the result is the in-process result, byte for byte
// as protojson, and the job reports the fit's progress while it runs.
func TestFitJobEqualsInProcess(t *testing.T) {
	ts := start(t, Config{Workers: 1}, nil)
	ctx := tctx(t, "")
	spec := fitSpec(t)
	want, err := tasks.Run(context.Background(), spec, ed.Options{Workers: ts.cfg.engineWorkers()})
	if err != nil {
		t.Fatal(err)
	}
	job, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec})
	if err != nil {
		t.Fatal(err)
	}
	if job.GetTask() != "fit" || job.GetPlan().GetMemoryBytes() <= 0 {
		t.Errorf("job %v", job)
	}
	msgs := watchUntil(t, ts.client, ctx, job.GetName())
	if last := msgs[len(msgs)-1]; last.GetState() != frustumv1.Job_SUCCEEDED {
		t.Fatalf("ended %v", last)
	}
	got, err := ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: job.GetName()})
	if err != nil {
		t.Fatal(err)
	}
	gotJSON, _ := tasks.MarshalJSON(got.GetFitResult())
	wantJSON, _ := tasks.MarshalJSON(want)
	if !bytes.Equal(gotJSON, wantJSON) {
		t.Errorf("fit through the service differs from in-process:\n%s\nwant\n%s", gotJSON, wantJSON)
	}
	fit := got.GetFitResult()
	if len(fit.GetModels()) != 3 || fit.GetModels()[0].GetParameters()[0].GetName() != "J" {
		t.Fatalf("models %v", fit.GetModels())
	}
	// The data were made with J = 10 K exactly (no noise): the fit finds it.
	if j := fit.GetModels()[0].GetParameters()[0].GetValue(); j < 9.999 || j > 10.001 {
		t.Errorf("J = %v, want 10", j)
	}
	if !slices.ContainsFunc(msgs, func(j *frustumv1.Job) bool { return j.GetProgress().GetStage() != "" }) {
		t.Log("no progress seen while running (the fit may have been too quick)")
	}
}

// Bad fit specs are refused at create with the field that is wrong.
func TestFitJobBadInput(t *testing.T) {
	ts := start(t, Config{Workers: 1, MaxSites: 12}, nil)
	ctx := tctx(t, "")
	edit := func(f func(p *frustumv1.FitParameters)) *frustumv1.JobSpec {
		s := fitSpec(t)
		f(s.GetFit())
		return s
	}
	for _, c := range []struct {
		name  string
		spec  *frustumv1.JobSpec
		code  codes.Code
		field string
	}{
		{"negative temperature", edit(func(p *frustumv1.FitParameters) { p.Data.Temperature[2] = -1 }), codes.InvalidArgument, "spec.fit.data.temperature[2]"},
		{"bad path", edit(func(p *frustumv1.FitParameters) { p.Vary[0].Paths[1] = "bonds[1].exchang" }), codes.InvalidArgument, "spec.fit.vary[0].paths[1]"},
		{"bad observable", edit(func(p *frustumv1.FitParameters) { p.Observable = "entropy" }), codes.InvalidArgument, "spec.fit.observable"},
		{"bad model", edit(func(p *frustumv1.FitParameters) { p.Models[0].Bonds[0].B = "nowhere" }), codes.InvalidArgument, "spec.fit.models[0].bonds[0].b"},
		{"cluster beside the fit", func() *frustumv1.JobSpec { s := fitSpec(t); s.Cluster = dimer(1); return s }(), codes.InvalidArgument, "spec.cluster"},
		{"too many sites", edit(func(p *frustumv1.FitParameters) { p.Models = append(p.Models, dmChain(13, 1)) }), codes.ResourceExhausted, "spec.fit.models[1].sites"},
	} {
		_, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: c.spec})
		wantCode(t, c.name, err, c.code)
		if paths := fieldPaths(err); !slices.Contains(paths, c.field) {
			t.Errorf("%s: field violations %v, want %q (%v)", c.name, paths, c.field, err)
		}
	}
}

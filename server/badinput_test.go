package server

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	frustumv1 "frustum/proto/frustum/v1"
)

// TestBadInput sends each bad input of FORMAT.md and checks the code and
// the dotted path of the BadRequest field violation.
func TestBadInput(t *testing.T) {
	ts := start(t, Config{Workers: 1, MaxSites: 12, MaxMemory: 10 << 20}, nil)
	ctx := tctx(t, "")
	okThermo := &frustumv1.ThermoParameters{Temperatures: []float64{1, 2}}
	thermo := func(c *frustumv1.Cluster, p *frustumv1.ThermoParameters) *frustumv1.JobSpec {
		return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Thermo{Thermo: p}}
	}
	edit := func(f func(c *frustumv1.Cluster)) *frustumv1.Cluster {
		c := dmChain(4, 10)
		f(c)
		return c
	}
	for _, tc := range []struct {
		name string
		spec *frustumv1.JobSpec
		code codes.Code
		path string
	}{
		{"no spec", nil, codes.InvalidArgument, "spec"},
		{"no task", &frustumv1.JobSpec{Cluster: dimer(1)}, codes.InvalidArgument, "spec.task"},
		{"no cluster", thermo(nil, okThermo), codes.InvalidArgument, "spec.cluster"},
		{"unknown site", thermo(edit(func(c *frustumv1.Cluster) { c.Bonds[2].B = "t9" }), okThermo), codes.InvalidArgument, "spec.cluster.bonds[2].b"},
		{"self bond", thermo(edit(func(c *frustumv1.Cluster) { c.Bonds[1].B = c.Bonds[1].A }), okThermo), codes.InvalidArgument, "spec.cluster.bonds[1]"},
		{"repeated bond", thermo(edit(func(c *frustumv1.Cluster) {
			c.Bonds = append(c.Bonds, &frustumv1.Bond{A: "s1", B: "s0", Exchange: proto.Float64(1)})
		}), okThermo), codes.InvalidArgument, "spec.cluster.bonds[3]"},
		{"bad spin", thermo(edit(func(c *frustumv1.Cluster) { c.Sites[2].Spin = proto.Float64(0.7) }), okThermo), codes.InvalidArgument, "spec.cluster.sites[2].spin"},
		{"NaN exchange", thermo(edit(func(c *frustumv1.Cluster) { c.Bonds[0].Exchange = proto.Float64(math.NaN()) }), okThermo), codes.InvalidArgument, "spec.cluster.bonds[0].exchange"},
		{"infinite g", thermo(edit(func(c *frustumv1.Cluster) { c.Sites[1].G = proto.Float64(math.Inf(1)) }), okThermo), codes.InvalidArgument, "spec.cluster.sites[1].g"},
		{"wrong tensor length", thermo(edit(func(c *frustumv1.Cluster) { c.Bonds[0].Tensor = []float64{1, 0, 0, 0} }), okThermo), codes.InvalidArgument, "spec.cluster.bonds[0].tensor"},
		{"wrong g tensor length", thermo(edit(func(c *frustumv1.Cluster) { c.Sites[0].GTensor = []float64{2, 2} }), okThermo), codes.InvalidArgument, "spec.cluster.sites[0].gTensor"},
		{"negative temperature", thermo(dimer(1), &frustumv1.ThermoParameters{Temperatures: []float64{1, -2}}), codes.InvalidArgument, "spec.thermo.temperatures[1]"},
		{"NaN temperature", &frustumv1.JobSpec{Cluster: dimer(1), Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{
			Temperatures: []float64{math.NaN()}, Fields: []float64{1}}}}, codes.InvalidArgument, "spec.magnetization.temperatures[0]"},
		{"short field", thermo(dimer(1), &frustumv1.ThermoParameters{Temperatures: []float64{1}, Field: []float64{0, 1}}), codes.InvalidArgument, "spec.thermo.field"},
		{"negative levels", &frustumv1.JobSpec{Cluster: dimer(1), Task: &frustumv1.JobSpec_Spectrum{Spectrum: &frustumv1.SpectrumParameters{Levels: -1}}}, codes.InvalidArgument, "spec.spectrum.levels"},
		{"too many sites", thermo(dmChain(13, 1), okThermo), codes.ResourceExhausted, "spec.cluster.sites"},
		{"Hilbert space too large", thermo(func() *frustumv1.Cluster {
			c := dmChain(12, 1)
			for _, s := range c.Sites {
				s.Spin = proto.Float64(2.5) // 6^12 = 2^31.0 states
			}
			return c
		}(), okThermo), codes.ResourceExhausted, "spec.cluster.sites"},
	} {
		_, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: tc.spec})
		wantCode(t, tc.name, err, tc.code)
		if p := fieldPaths(err); !slices.Contains(p, tc.path) {
			t.Errorf("%s: field violations %q, want %q (error %v)", tc.name, p, tc.path, err)
		}
	}

	// A task that can never fit the server's memory: RESOURCE_EXHAUSTED
	// naming both figures.
	big := &frustumv1.JobSpec{Cluster: dmChain(10, 10), Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{
		Temperatures: []float64{1}, Fields: fields(2), Direction: []float64{1, 0, 0}}}}
	_, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: big})
	if status.Code(err) != codes.ResourceExhausted {
		t.Fatalf("over the memory limit: %v, want RESOURCE_EXHAUSTED", err)
	}
	ei := errorInfo(err)
	need, _ := strconv.ParseInt(ei.GetMetadata()["need_bytes"], 10, 64)
	limit, _ := strconv.ParseInt(ei.GetMetadata()["limit_bytes"], 10, 64)
	if ei.GetReason() != "MEMORY_LIMIT" || limit != 10<<20 || need <= limit {
		t.Errorf("memory limit error info: %v", ei)
	}
	if msg := err.Error(); !strings.Contains(msg, "10.0 MiB") || !strings.Contains(msg, "needs about") {
		t.Errorf("memory limit message %q does not name both figures", msg)
	}

	// Nothing of it became a job.
	resp, err := ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{})
	if err != nil || len(resp.GetJobs()) != 0 {
		t.Errorf("refused requests left jobs: %v, %v", resp.GetJobs(), err)
	}
}

// TestOversizedRequest checks that a request over the message limit is
// refused by gRPC before any work, and that the limit is not raised.
func TestOversizedRequest(t *testing.T) {
	ts := start(t, Config{Workers: 1, MaxRequestBytes: 64 << 10}, nil)
	ctx := tctx(t, "")
	temps := make([]float64, 10000) // 80 kB of doubles
	for i := range temps {
		temps[i] = float64(i + 1)
	}
	spec := &frustumv1.JobSpec{Cluster: dimer(1), Task: &frustumv1.JobSpec_Thermo{Thermo: &frustumv1.ThermoParameters{Temperatures: temps}}}
	_, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec})
	wantCode(t, "oversized request", err, codes.ResourceExhausted)
	// Just under the limit is fine.
	spec.GetThermo().Temperatures = temps[:7000]
	if _, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec}); err != nil {
		t.Errorf("a request of %d bytes: %v", proto.Size(spec), err)
	}
	resp, err := ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{})
	if err != nil || len(resp.GetJobs()) != 1 {
		t.Errorf("%d jobs after one refused and one accepted request (%v)", len(resp.GetJobs()), err)
	}
	// A huge cluster is refused for its size before it is validated.
	c := &frustumv1.Cluster{}
	for i := range 500 {
		c.Sites = append(c.Sites, &frustumv1.Site{Label: fmt.Sprint(i), Spin: proto.Float64(0.3)})
	}
	_, err = ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Spectrum{}}})
	wantCode(t, "500 sites", err, codes.ResourceExhausted)
	if ei := errorInfo(err); ei.GetReason() != "CLUSTER_TOO_LARGE" || ei.GetMetadata()["max_sites"] != "40" {
		t.Errorf("500 sites: error info %v", ei)
	}
}

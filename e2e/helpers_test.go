package e2e

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// maxMemory is the --max-memory of every frustumd these tests start, and
// the memory limit of the in-process runs they compare with: the engine's
// report (its memory estimate) depends on the limits and the workers.
const (
	maxMemory     = 4 << 30
	maxMemoryFlag = "4GiB"
)

// binDir holds the frustumd binary built once for the whole test binary.
var (
	binDir    string
	buildOnce sync.Once
	binPath   string
	buildErr  error
)

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "frustum-e2e-")
	if err != nil {
		fmt.Fprintln(os.Stderr, "e2e:", err)
		os.Exit(1)
	}
	binDir = dir
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// frustumd returns the path of the frustumd binary, built from this module
// with `go build` (and the build tags of this test binary, frustumdBuildTags,
// so that its dense solver is the one of the in-process runs it is compared
// with) the first time it is asked for.
func frustumd(tb testing.TB) string {
	tb.Helper()
	buildOnce.Do(func() {
		goTool, err := exec.LookPath("go")
		if err != nil {
			buildErr = fmt.Errorf("the go command is not on PATH: %w", err)
			return
		}
		root, err := moduleRoot()
		if err != nil {
			buildErr = err
			return
		}
		out := filepath.Join(binDir, "frustumd")
		cmd := exec.Command(goTool, "build", "-tags="+strings.Join(frustumdBuildTags, ","), "-o", out, "./cmd/frustumd")
		cmd.Dir = root
		if b, err := cmd.CombinedOutput(); err != nil {
			buildErr = fmt.Errorf("go build ./cmd/frustumd: %v\n%s", err, b)
			return
		}
		binPath = out
	})
	if buildErr != nil {
		tb.Fatal(buildErr)
	}
	return binPath
}

// moduleRoot is the directory of go.mod above the package directory.
func moduleRoot() (string, error) {
	dir, err := os.Getwd()
	if err != nil {
		return "", err
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir, nil
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			return "", errors.New("no go.mod above the test directory")
		}
		dir = parent
	}
}

// daemon is one frustumd process on 127.0.0.1 with a client connection.
type daemon struct {
	tb      testing.TB
	cmd     *exec.Cmd
	addr    string
	dataDir string
	workers int
	logPath string
	conn    *grpc.ClientConn
	jobs    frustumv1.JobServiceClient

	exited  chan struct{} // closed when the process has been waited for
	waitErr error
}

// startDaemon starts frustumd on a free loopback port with the data
// directory dataDir, workers worker slots (0: the default, one per core)
// and the extra flags, and waits until its health service reports SERVING.
// The process is killed at the end of the test.
func startDaemon(tb testing.TB, dataDir string, workers int, extra ...string) *daemon {
	tb.Helper()
	bin := frustumd(tb)
	logDir := tb.TempDir()
	var lastErr error
	for attempt := 1; attempt <= 3; attempt++ {
		d, err := tryStart(tb, bin, dataDir, workers, extra, filepath.Join(logDir, fmt.Sprintf("frustumd-%d.log", attempt)))
		if err == nil {
			return d
		}
		lastErr = err
		// Another process may have taken the free port in between: retry on
		// a new one, but only for that.
		if !strings.Contains(err.Error(), "address already in use") {
			break
		}
	}
	tb.Fatalf("frustumd did not start: %v", lastErr)
	return nil
}

func tryStart(tb testing.TB, bin, dataDir string, workers int, extra []string, logPath string) (*daemon, error) {
	port, err := freePort()
	if err != nil {
		return nil, err
	}
	logFile, err := os.Create(logPath)
	if err != nil {
		return nil, err
	}
	d := &daemon{
		tb:      tb,
		addr:    net.JoinHostPort("127.0.0.1", strconv.Itoa(port)),
		dataDir: dataDir,
		workers: workers,
		logPath: logPath,
		exited:  make(chan struct{}),
	}
	args := []string{"--listen", d.addr, "--data", dataDir, "--max-memory", maxMemoryFlag, "--grace", "5s"}
	if workers > 0 {
		args = append(args, "--workers", strconv.Itoa(workers))
	}
	args = append(args, extra...) // later flags win
	d.cmd = exec.Command(bin, args...)
	d.cmd.Stdout = logFile
	d.cmd.Stderr = logFile
	if err := d.cmd.Start(); err != nil {
		logFile.Close()
		return nil, err
	}
	go func() {
		d.waitErr = d.cmd.Wait()
		logFile.Close()
		close(d.exited)
	}()
	tb.Cleanup(func() {
		d.kill()
		if tb.Failed() {
			tb.Logf("frustumd log %s (pid %d):\n%s", filepath.Base(d.logPath), d.cmd.Process.Pid, d.logTail(8<<10))
		}
	})
	d.conn, err = grpc.NewClient(d.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		d.kill()
		return nil, err
	}
	d.jobs = frustumv1.NewJobServiceClient(d.conn)
	if err := d.waitServing(20 * time.Second); err != nil {
		d.kill()
		return nil, fmt.Errorf("%w; log:\n%s", err, d.logTail(4<<10))
	}
	return d, nil
}

// freePort returns a TCP port on 127.0.0.1 that was free a moment ago.
func freePort() (int, error) {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return 0, err
	}
	defer lis.Close()
	return lis.Addr().(*net.TCPAddr).Port, nil
}

// waitServing polls grpc.health.v1 until the server reports SERVING, the
// process exits, or the timeout passes.
func (d *daemon) waitServing(timeout time.Duration) error {
	health := healthpb.NewHealthClient(d.conn)
	deadline := time.Now().Add(timeout)
	var last error
	for time.Now().Before(deadline) {
		select {
		case <-d.exited:
			return fmt.Errorf("frustumd exited before serving: %v", d.waitErr)
		default:
		}
		ctx, cancel := context.WithTimeout(context.Background(), time.Second)
		resp, err := health.Check(ctx, &healthpb.HealthCheckRequest{Service: frustumv1.JobService_ServiceDesc.ServiceName})
		cancel()
		if err == nil && resp.GetStatus() == healthpb.HealthCheckResponse_SERVING {
			return nil
		}
		last = err
		time.Sleep(50 * time.Millisecond)
	}
	return fmt.Errorf("frustumd on %s not SERVING after %v (last error: %v)", d.addr, timeout, last)
}

// kill ends the process with SIGKILL (if it still runs), waits for it and
// closes the connection. Later calls do nothing more.
func (d *daemon) kill() {
	select {
	case <-d.exited:
	default:
		_ = d.cmd.Process.Signal(syscall.SIGKILL)
		select {
		case <-d.exited:
		case <-time.After(10 * time.Second):
			d.tb.Errorf("frustumd pid %d did not exit 10s after SIGKILL", d.cmd.Process.Pid)
		}
	}
	if d.conn != nil {
		d.conn.Close()
	}
}

// logTail returns the last n bytes of the process's log.
func (d *daemon) logTail(n int64) string {
	b, err := os.ReadFile(d.logPath)
	if err != nil {
		return err.Error()
	}
	if int64(len(b)) > n {
		b = b[int64(len(b))-n:]
	}
	return string(b)
}

// memory returns VmRSS and VmHWM (peak RSS) of the process, in bytes.
func (d *daemon) memory() (rss, hwm int64, err error) {
	f, err := os.Open(fmt.Sprintf("/proc/%d/status", d.cmd.Process.Pid))
	if err != nil {
		return 0, 0, err
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		key, rest, ok := strings.Cut(sc.Text(), ":")
		if !ok || (key != "VmRSS" && key != "VmHWM") {
			continue
		}
		fields := strings.Fields(rest)
		if len(fields) != 2 || fields[1] != "kB" {
			return 0, 0, fmt.Errorf("unexpected %s line %q", key, sc.Text())
		}
		kb, err := strconv.ParseInt(fields[0], 10, 64)
		if err != nil {
			return 0, 0, err
		}
		if key == "VmRSS" {
			rss = kb << 10
		} else {
			hwm = kb << 10
		}
	}
	if rss == 0 || hwm == 0 {
		return 0, 0, errors.New("no VmRSS or VmHWM in /proc status")
	}
	return rss, hwm, sc.Err()
}

// dial opens a new client connection of its own to the daemon, closed at
// the end of the test.
func (d *daemon) dial(tb testing.TB) frustumv1.JobServiceClient {
	tb.Helper()
	conn, err := grpc.NewClient(d.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() { conn.Close() })
	return frustumv1.NewJobServiceClient(conn)
}

// engineOptions are the options with which a frustumd of that many worker
// slots runs each job's engine: the same memory limit and
// max(1, NumCPU/workers) goroutines (0 slots meaning one per core).
func engineOptions(workers int) ed.Options {
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	return ed.Options{Limits: ed.Limits{MaxMemory: maxMemory}, Workers: max(1, runtime.NumCPU()/workers)}
}

// inProcessJSON runs spec in this process and returns its result in
// protojson, the form the CLI prints.
func inProcessJSON(tb testing.TB, spec *frustumv1.JobSpec, opt ed.Options) []byte {
	tb.Helper()
	res, err := tasks.Run(context.Background(), spec, opt)
	if err != nil {
		tb.Fatalf("in-process tasks.Run: %v", err)
	}
	b, err := tasks.MarshalJSON(res)
	if err != nil {
		tb.Fatal(err)
	}
	return b
}

// resultJSON returns the protojson of a succeeded job's result: the inline
// result of the job when present, else the result fetched with
// GetJobResult.
func resultJSON(ctx context.Context, c frustumv1.JobServiceClient, job *frustumv1.Job) ([]byte, error) {
	var res proto.Message
	switch r := job.GetResult().(type) {
	case *frustumv1.Job_SpectrumResult:
		res = r.SpectrumResult
	case *frustumv1.Job_ThermoResult:
		res = r.ThermoResult
	case *frustumv1.Job_MagnetizationResult:
		res = r.MagnetizationResult
	default:
		var err error
		if res, err = fetchResult(ctx, c, job.GetName()); err != nil {
			return nil, err
		}
	}
	return tasks.MarshalJSON(res)
}

// fetchResult reads a job's result with GetJobResult.
func fetchResult(ctx context.Context, c frustumv1.JobServiceClient, name string) (proto.Message, error) {
	stream, err := c.GetJobResult(ctx, &frustumv1.GetJobResultRequest{Name: name})
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	var typeName string
	for {
		chunk, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, err
		}
		if chunk.GetOffset() != int64(buf.Len()) {
			return nil, fmt.Errorf("%s: chunk at offset %d after %d bytes", name, chunk.GetOffset(), buf.Len())
		}
		typeName = chunk.GetType()
		buf.Write(chunk.GetData())
	}
	var res proto.Message
	switch typeName {
	case "frustum.v1.SpectrumResult":
		res = new(frustumv1.SpectrumResult)
	case "frustum.v1.ThermoResult":
		res = new(frustumv1.ThermoResult)
	case "frustum.v1.MagnetizationResult":
		res = new(frustumv1.MagnetizationResult)
	default:
		return nil, fmt.Errorf("%s: result of unknown type %q", name, typeName)
	}
	return res, proto.Unmarshal(buf.Bytes(), res)
}

// terminal reports whether a job state is final.
func terminal(s frustumv1.Job_State) bool {
	return s == frustumv1.Job_SUCCEEDED || s == frustumv1.Job_FAILED || s == frustumv1.Job_CANCELLED
}

// watchUntil follows a job with WatchJob until stop returns true for a
// message or the stream ends, and returns every message received.
func watchUntil(ctx context.Context, c frustumv1.JobServiceClient, name string, stop func(*frustumv1.Job) bool) ([]*frustumv1.Job, error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.WatchJob(ctx, &frustumv1.WatchJobRequest{Name: name})
	if err != nil {
		return nil, err
	}
	var got []*frustumv1.Job
	for {
		j, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return got, nil
		}
		if err != nil {
			return got, err
		}
		got = append(got, j)
		if stop != nil && stop(j) {
			return got, nil
		}
	}
}

// waitTerminal watches a job to its terminal state and returns it with
// its result (GetJob after the watch ends).
func waitTerminal(ctx context.Context, c frustumv1.JobServiceClient, name string) (*frustumv1.Job, []*frustumv1.Job, error) {
	msgs, err := watchUntil(ctx, c, name, nil)
	if err != nil {
		return nil, msgs, fmt.Errorf("watch %s: %w", name, err)
	}
	if len(msgs) == 0 || !terminal(msgs[len(msgs)-1].GetState()) {
		return nil, msgs, fmt.Errorf("watch %s ended without a terminal state", name)
	}
	job, err := c.GetJob(ctx, &frustumv1.GetJobRequest{Name: name})
	if err != nil {
		return nil, msgs, fmt.Errorf("get %s: %w", name, err)
	}
	return job, msgs, nil
}

// listAll pages through ListJobs (pageSize at a time) and returns every
// job in order; it fails after maxPages pages.
func listAll(ctx context.Context, c frustumv1.JobServiceClient, pageSize int32, state frustumv1.Job_State, maxPages int) ([]*frustumv1.Job, error) {
	var all []*frustumv1.Job
	token := ""
	for page := 0; page < maxPages; page++ {
		resp, err := c.ListJobs(ctx, &frustumv1.ListJobsRequest{PageSize: pageSize, PageToken: token, State: state})
		if err != nil {
			return all, fmt.Errorf("ListJobs page %d: %w", page, err)
		}
		if len(resp.GetJobs()) > int(pageSize) {
			return all, fmt.Errorf("ListJobs page %d: %d jobs, more than page_size %d", page, len(resp.GetJobs()), pageSize)
		}
		all = append(all, resp.GetJobs()...)
		token = resp.GetNextPageToken()
		if token == "" {
			return all, nil
		}
	}
	return all, fmt.Errorf("ListJobs: still a next page after %d pages", maxPages)
}

// The specs of these tests, all small but a long one.

func spectrumSpec(c *frustumv1.Cluster, field []float64) *frustumv1.JobSpec {
	return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Spectrum{Spectrum: &frustumv1.SpectrumParameters{Field: field}}}
}

func thermoSpec(c *frustumv1.Cluster, temps, field []float64) *frustumv1.JobSpec {
	return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Thermo{Thermo: &frustumv1.ThermoParameters{Temperatures: temps, Field: field}}}
}

func magnetizationSpec(c *frustumv1.Cluster, temps, fields, direction []float64) *frustumv1.JobSpec {
	return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{
		Temperatures: temps, Fields: fields, Direction: direction}}}
}

// linspace returns n points from a to b.
func linspace(a, b float64, n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = a + (b-a)*float64(i)/float64(n-1)
	}
	return out
}

// smallSpec is the k-th of a family of tiny, distinct specs: dimers,
// triangles and 4-site chains with a coupling that depends on k, cycling
// through the three tasks.
func smallSpec(k int) *frustumv1.JobSpec {
	j := 1 + 0.001*float64(k)
	switch k % 3 {
	case 0:
		return spectrumSpec(cluster.Chain(2, 0.5, j, false).ToProto(), []float64{0, 0, 0.5})
	case 1:
		return thermoSpec(cluster.Triangle(0.5, j).ToProto(), []float64{0.5, 1, 2, 5, 10}, nil)
	default:
		return magnetizationSpec(cluster.Chain(4, 0.5, j, false).ToProto(), []float64{0, 1}, linspace(0, 4, 9), nil)
	}
}

// longSpec is a magnetization of a 9-site open chain with a DM vector
// along z on every bond and the field along x: no conserved S^z, so each
// of its 40 fields is a dense complex diagonalization of dimension 512,
// several seconds in all.
func longSpec() *frustumv1.JobSpec {
	c := cluster.Chain(9, 0.5, 1, false).ToProto()
	c.Name = "open chain of 9 spins 1/2 with DM along z"
	c.Symmetries = nil // the reflection reverses the DM vectors
	for _, b := range c.Bonds {
		b.Dm = []float64{0, 0, 0.3}
	}
	return magnetizationSpec(c, []float64{0.5, 2}, linspace(0, 10, 40), []float64{1, 0, 0})
}

// multimerSpec is the 7-site defect multimer magnetization of the
// latency benchmark: 5 temperatures and 301 fields.
func multimerSpec(jDefect float64) *frustumv1.JobSpec {
	c := cluster.DefectMultimer(cluster.MultimerParams{JPlanar: 1.2, JDefect: jDefect, DMPlanar: 0.1}).ToProto()
	return magnetizationSpec(c, []float64{0.1, 0.5, 1, 2, 5}, linspace(0, 15, 301), nil)
}

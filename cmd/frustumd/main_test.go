package main

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/proto"

	frustumv1 "frustum/proto/frustum/v1"
	"frustum/server"
)

func TestHashToken(t *testing.T) {
	var out, errOut bytes.Buffer
	if code := run([]string{"hash-token"}, strings.NewReader("  secret  \nignored\n"), &out, &errOut); code != 0 {
		t.Fatalf("hash-token: exit %d, %s", code, errOut.String())
	}
	if got := strings.TrimSpace(out.String()); got != server.HashToken("secret") || len(got) != 64 {
		t.Errorf("hash-token printed %q", got)
	}
	out.Reset()
	if code := run([]string{"hash-token"}, strings.NewReader(""), &out, &errOut); code != 1 || out.Len() != 0 {
		t.Errorf("hash-token without a token: exit %d, stdout %q", code, out.String())
	}
	if code := run([]string{"hash-token", "x"}, strings.NewReader("t\n"), &out, &errOut); code != 2 {
		t.Errorf("hash-token with an argument: exit %d", code)
	}
}

func TestFlags(t *testing.T) {
	var out, errOut bytes.Buffer
	if code := run([]string{"--help"}, nil, &out, &errOut); code != 0 || !strings.Contains(errOut.String(), "Example:") ||
		!strings.Contains(errOut.String(), "--listen 0.0.0.0:7447") {
		t.Errorf("--help: exit %d\n%s", code, errOut.String())
	}
	for _, args := range [][]string{{"--nope"}, {"--max-memory", "lots"}, {"--workers", "-1"}, {"extra"}, {"--grace", "soon"}} {
		errOut.Reset()
		if code := run(args, nil, &out, &errOut); code != 2 {
			t.Errorf("%q: exit %d, want 2\n%s", args, code, errOut.String())
		}
	}
	cfg, code, err := parseFlags([]string{"--max-memory", "1.5GiB", "--workers", "3", "--max-request", "1MiB", "--retention", "48h"}, io.Discard)
	if err != nil || code != 0 || cfg.MaxMemory != 3<<29 || cfg.Workers != 3 || cfg.MaxRequestBytes != 1<<20 || cfg.Retention != 48*time.Hour ||
		cfg.Listen != "127.0.0.1:7447" || cfg.DataDir == "" {
		t.Errorf("parseFlags: %+v, %d, %v", cfg, code, err)
	}
	t.Setenv("XDG_DATA_HOME", "/srv/data")
	if d := defaultDataDir(); d != "/srv/data/frustum" {
		t.Errorf("defaultDataDir with XDG_DATA_HOME: %q", d)
	}
	t.Setenv("XDG_DATA_HOME", "")
	t.Setenv("HOME", "/home/someone")
	if d := defaultDataDir(); d != "/home/someone/.local/share/frustum" {
		t.Errorf("defaultDataDir: %q", d)
	}
}

func TestRefuseInsecure(t *testing.T) {
	var out, errOut bytes.Buffer
	dir := filepath.Join(t.TempDir(), "data")
	code := run([]string{"--listen", "0.0.0.0:7447", "--data", dir}, nil, &out, &errOut)
	if code != 1 || !strings.Contains(errOut.String(), "TLS") {
		t.Errorf("non-loopback without TLS: exit %d\n%s", code, errOut.String())
	}
	if _, err := os.Stat(dir); !os.IsNotExist(err) {
		t.Error("the data directory was created before the refusal")
	}
}

// daemon is a frustumd process started by a test.
type daemon struct {
	cmd  *exec.Cmd
	addr string
	done chan struct{} // closed when the process has exited
	err  error         // its exit status, once done
}

// buildDaemon builds frustumd into a temporary directory.
func buildDaemon(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "frustumd")
	goTool := filepath.Join(runtime.GOROOT(), "bin", "go")
	out, err := exec.Command(goTool, "build", "-o", bin, ".").CombinedOutput()
	if err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

var servingLine = regexp.MustCompile(`msg=serving addr=(\S+)`)

// startDaemon starts frustumd with args and waits until it serves.
func startDaemon(t *testing.T, bin string, args ...string) *daemon {
	t.Helper()
	cmd := exec.Command(bin, args...)
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	d := &daemon{cmd: cmd, done: make(chan struct{})}
	addr := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(stderr)
		for sc.Scan() {
			if testing.Verbose() {
				fmt.Fprintln(os.Stderr, "frustumd:", sc.Text())
			}
			if m := servingLine.FindStringSubmatch(sc.Text()); m != nil {
				addr <- m[1]
			}
		}
		d.err = cmd.Wait()
		close(d.done)
	}()
	t.Cleanup(func() {
		cmd.Process.Kill()
		<-d.done
	})
	select {
	case d.addr = <-addr:
	case <-d.done:
		t.Fatalf("frustumd exited before serving: %v", d.err)
	case <-time.After(10 * time.Second):
		t.Fatal("frustumd did not start serving")
	}
	return d
}

// slowSpec is a magnetization job of a 9-site chain with DM along z and
// the field along x: each field point is a dense complex diagonalization
// of dimension 512, about a quarter of a second.
func slowSpec(nFields int, j float64) *frustumv1.JobSpec {
	c := &frustumv1.Cluster{Name: fmt.Sprintf("DM chain J=%g", j)}
	for i := range 9 {
		c.Sites = append(c.Sites, &frustumv1.Site{Label: fmt.Sprintf("s%d", i)})
	}
	for i := range 8 {
		c.Bonds = append(c.Bonds, &frustumv1.Bond{A: fmt.Sprintf("s%d", i), B: fmt.Sprintf("s%d", i+1), Exchange: proto.Float64(j), Dm: []float64{0, 0, j / 5}})
	}
	f := make([]float64, nFields)
	for i := range f {
		f[i] = float64(i + 1)
	}
	return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{
		Temperatures: []float64{2}, Fields: f, Direction: []float64{1, 0, 0}}}}
}

func dial(t *testing.T, addr string) frustumv1.JobServiceClient {
	t.Helper()
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return frustumv1.NewJobServiceClient(conn)
}

// TestKillAndRestart builds frustumd, submits jobs, kills it with SIGKILL
// while a job runs, starts it again on the same data directory and sees
// every job finish exactly once with its result; SIGTERM then stops it
// cleanly.
func TestKillAndRestart(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs frustumd")
	}
	bin := buildDaemon(t)
	data := t.TempDir()
	args := []string{"--listen", "127.0.0.1:0", "--data", data, "--workers", "1"}
	d1 := startDaemon(t, bin, args...)
	c1 := dial(t, d1.addr)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	var names []string
	for i := range 3 {
		j, err := c1.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: slowSpec(4, float64(10+i))})
		if err != nil {
			t.Fatal(err)
		}
		names = append(names, j.GetName())
	}
	for {
		j, err := c1.GetJob(ctx, &frustumv1.GetJobRequest{Name: names[0]})
		if err != nil {
			t.Fatal(err)
		}
		if j.GetState() == frustumv1.Job_RUNNING && j.GetProgress().GetDone() > 0 {
			break
		}
		if j.GetState() != frustumv1.Job_QUEUED && j.GetState() != frustumv1.Job_RUNNING {
			t.Fatalf("the first job is %v before the kill", j.GetState())
		}
		time.Sleep(20 * time.Millisecond)
	}
	if err := d1.cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	<-d1.done

	d2 := startDaemon(t, bin, args...)
	c2 := dial(t, d2.addr)
	for i, n := range names {
		var j *frustumv1.Job
		for {
			var err error
			j, err = c2.GetJob(ctx, &frustumv1.GetJobRequest{Name: n})
			if err != nil {
				t.Fatal(err)
			}
			if j.GetState() == frustumv1.Job_SUCCEEDED || j.GetState() == frustumv1.Job_FAILED || j.GetState() == frustumv1.Job_CANCELLED {
				break
			}
			time.Sleep(50 * time.Millisecond)
		}
		wantAttempts := int32(1)
		if i == 0 {
			wantAttempts = 2 // killed while running, run again
		}
		if j.GetState() != frustumv1.Job_SUCCEEDED || j.GetAttempts() != wantAttempts || len(j.GetMagnetizationResult().GetCurves()) != 1 {
			t.Errorf("job %d after the restart: %v, %d attempts, result %v", i, j.GetState(), j.GetAttempts(), j.GetMagnetizationResult() != nil)
		}
	}
	list, err := c2.ListJobs(ctx, &frustumv1.ListJobsRequest{})
	if err != nil || len(list.GetJobs()) != 3 {
		t.Errorf("%d jobs listed after the restart (%v), want 3", len(list.GetJobs()), err)
	}

	if err := d2.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	select {
	case <-d2.done:
		if d2.err != nil {
			t.Errorf("frustumd after SIGTERM: %v", d2.err)
		}
	case <-time.After(20 * time.Second):
		t.Error("frustumd did not stop on SIGTERM")
	}
}

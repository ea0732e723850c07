// Package python_test runs the notebook client's checks from go test: the
// committed Python stubs match the proto files, the Python unit tests pass
// against a frustumd built from this module, and the example notebook runs
// to its end against another one.
//
// They need Debian's python3 with python3-grpcio, python3-protobuf,
// python3-numpy, python3-pandas, python3-matplotlib, python3-nbclient,
// python3-nbformat and python3-ipykernel (and protobuf-compiler with
// protobuf-compiler-grpc for the stub check). Without them the tests are
// skipped, unless $CI is "true", where they fail: .ci/run installs them.
package python_test

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
)

// python is Debian's interpreter, which sees the Debian packages (a python3
// earlier on PATH, such as a pyenv shim, may not).
const python = "/usr/bin/python3"

// modules are what the tests and the notebook import.
var modules = []string{"grpc", "google.protobuf", "numpy", "pandas", "matplotlib", "nbclient", "nbformat", "ipykernel"}

// need skips the test when check fails, or fails it under CI.
func need(t *testing.T, what string, check func() error) {
	t.Helper()
	if err := check(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("%s: %v (CI installs it: see .ci/run)", what, err)
		}
		t.Skipf("%s: %v", what, err)
	}
}

func needPython(t *testing.T) {
	t.Helper()
	need(t, "Debian's python3 with "+strings.Join(modules, ", "), func() error {
		out, err := exec.Command(python, "-c", "import "+strings.Join(modules, ", ")).CombinedOutput()
		if err != nil {
			return fmt.Errorf("%v: %s", err, bytes.TrimSpace(out))
		}
		return nil
	})
}

var (
	buildOnce sync.Once
	binPath   string
	buildErr  error
)

// frustumd builds cmd/frustumd once for the test binary and returns its path.
func frustumd(t *testing.T) string {
	t.Helper()
	buildOnce.Do(func() {
		goTool, err := exec.LookPath("go")
		if err != nil {
			buildErr = fmt.Errorf("the go command is not on PATH: %w", err)
			return
		}
		dir, err := os.MkdirTemp("", "frustum-python-")
		if err != nil {
			buildErr = err
			return
		}
		out := filepath.Join(dir, "frustumd")
		cmd := exec.Command(goTool, "build", "-o", out, "./cmd/frustumd")
		cmd.Dir = repoRoot(t)
		if b, err := cmd.CombinedOutput(); err != nil {
			buildErr = fmt.Errorf("go build ./cmd/frustumd: %v\n%s", err, b)
			return
		}
		binPath = out
	})
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return binPath
}

func TestMain(m *testing.M) {
	code := m.Run()
	if binPath != "" {
		os.RemoveAll(filepath.Dir(binPath))
	}
	os.Exit(code)
}

// repoRoot is the module root, two levels above this directory.
func repoRoot(t *testing.T) string {
	t.Helper()
	wd, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	root := filepath.Dir(filepath.Dir(wd))
	if _, err := os.Stat(filepath.Join(root, "go.mod")); err != nil {
		t.Fatalf("no go.mod two levels above %s", wd)
	}
	return root
}

var serving = regexp.MustCompile(`msg=serving addr=(\S+)`)

// startServer runs frustumd on a free loopback port with a fresh data
// directory, stops it at the end of the test and returns its address.
func startServer(t *testing.T) string {
	t.Helper()
	bin := frustumd(t)
	dir := t.TempDir()
	logPath := filepath.Join(dir, "frustumd.log")
	logFile, err := os.Create(logPath)
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(bin, "--listen", "127.0.0.1:0", "--data", filepath.Join(dir, "data"), "--grace", "1s")
	cmd.Stdout, cmd.Stderr = logFile, logFile
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	t.Cleanup(func() {
		cmd.Process.Signal(syscall.SIGTERM)
		select {
		case <-exited:
		case <-time.After(30 * time.Second):
			cmd.Process.Kill()
			<-exited
		}
		logFile.Close()
		if t.Failed() {
			b, _ := os.ReadFile(logPath)
			t.Logf("frustumd log:\n%s", b)
		}
	})
	deadline := time.After(60 * time.Second)
	for {
		b, _ := os.ReadFile(logPath)
		if m := serving.FindSubmatch(b); m != nil {
			return string(m[1])
		}
		select {
		case err := <-exited:
			t.Fatalf("frustumd exited (%v):\n%s", err, b)
		case <-deadline:
			t.Fatalf("frustumd did not serve within 60 s:\n%s", b)
		case <-time.After(20 * time.Millisecond):
		}
	}
}

// pythonEnv is the environment of the Python runs: no bytecode files in the
// work tree, and the client's directory first on the path when withPath.
func pythonEnv(withPath bool, extra ...string) []string {
	var env []string
	for _, kv := range os.Environ() {
		if !strings.HasPrefix(kv, "PYTHONPATH=") {
			env = append(env, kv)
		}
	}
	env = append(env, "PYTHONDONTWRITEBYTECODE=1")
	if withPath {
		if wd, err := os.Getwd(); err == nil {
			env = append(env, "PYTHONPATH="+wd)
		}
	}
	return append(env, extra...)
}

// TestStubsCurrent regenerates the Python stubs into a temporary directory
// and compares them with the committed ones (generate.sh --check).
func TestStubsCurrent(t *testing.T) {
	need(t, "protoc and grpc_python_plugin (protobuf-compiler, protobuf-compiler-grpc)", func() error {
		for _, tool := range []string{"protoc", "grpc_python_plugin"} {
			if _, err := exec.LookPath(tool); err != nil {
				return err
			}
		}
		return nil
	})
	out, err := exec.Command("sh", "generate.sh", "--check").CombinedOutput()
	if err != nil {
		t.Fatalf("generate.sh --check: %v\n%s", err, out)
	}
}

var ranTests = regexp.MustCompile(`(?m)^Ran (\d+) tests? in`)

// TestPythonUnitTests runs client/python/tests with unittest; the server
// tests start their own frustumd from the binary built here.
func TestPythonUnitTests(t *testing.T) {
	needPython(t)
	bin := frustumd(t)
	cmd := exec.Command(python, "-m", "unittest", "discover", "-s", "tests", "-v")
	cmd.Env = pythonEnv(true, "FRUSTUMD="+bin)
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("python3 -m unittest: %v\n%s", err, out)
	}
	m := ranTests.FindSubmatch(out)
	if m == nil {
		t.Fatalf("no 'Ran N tests' line in the unittest output:\n%s", out)
	}
	if os.Getenv("CI") == "true" && bytes.Contains(out, []byte("skipped")) {
		t.Errorf("Python tests were skipped under CI:\n%s", out)
	}
	t.Logf("python3 -m unittest: ran %s tests", m[1])
}

// notebook is the part of the .ipynb format that the checks read.
type notebook struct {
	Cells []struct {
		CellType       string `json:"cell_type"`
		ExecutionCount *int   `json:"execution_count"`
		Outputs        []struct {
			OutputType string                     `json:"output_type"`
			Name       string                     `json:"name"`
			EName      string                     `json:"ename"`
			Data       map[string]json.RawMessage `json:"data"`
		} `json:"outputs"`
	} `json:"cells"`
}

func readNotebook(t *testing.T, path string) notebook {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var nb notebook
	if err := json.Unmarshal(b, &nb); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return nb
}

// TestNotebookCommittedClean keeps outputs out of the committed notebook:
// they are made by running it.
func TestNotebookCommittedClean(t *testing.T) {
	nb := readNotebook(t, filepath.Join("examples", "defect_fit.ipynb"))
	code := 0
	for i, c := range nb.Cells {
		if c.CellType != "code" {
			continue
		}
		code++
		if len(c.Outputs) > 0 || c.ExecutionCount != nil {
			t.Errorf("cell %d has outputs or an execution count: clear them before committing", i)
		}
	}
	if code == 0 {
		t.Fatal("the notebook has no code cell")
	}
}

// TestExampleNotebook executes examples/defect_fit.ipynb against a fresh
// frustumd (FRUSTUM_SERVER) and fails when any cell fails; every code cell
// must have run, and the notebook draws its figures.
func TestExampleNotebook(t *testing.T) {
	needPython(t)
	addr := startServer(t)
	out := filepath.Join(t.TempDir(), "defect_fit.out.ipynb")
	cmd := exec.Command(python, filepath.Join("tests", "run_notebook.py"), filepath.Join("examples", "defect_fit.ipynb"), out)
	cmd.Env = pythonEnv(false, "FRUSTUM_SERVER="+addr, "MPLBACKEND=Agg")
	start := time.Now()
	b, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("run_notebook.py: %v\n%s", err, b)
	}
	t.Logf("notebook executed in %v", time.Since(start).Round(time.Millisecond))
	nb := readNotebook(t, out)
	images := 0
	for i, c := range nb.Cells {
		if c.CellType != "code" {
			continue
		}
		if c.ExecutionCount == nil {
			t.Errorf("cell %d did not run", i)
		}
		for _, o := range c.Outputs {
			if o.OutputType == "error" {
				t.Errorf("cell %d: %s", i, o.EName)
			}
			if _, ok := o.Data["image/png"]; ok {
				images++
			}
		}
	}
	if images < 3 {
		t.Errorf("the executed notebook shows %d figures, want 3", images)
	}
}

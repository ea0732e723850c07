package eigen

import (
	"bufio"
	"context"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"maps"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"
)

// BenchmarkDenseAgainstNumpy times each backend of the build (PureGo, and
// LAPACK with -tags lapack) against numpy.linalg.eigvalsh (values) and
// numpy.linalg.eigh (vectors) of Debian's python3-numpy on the same matrix,
// in the same run: the seeded random matrix of randSym / randHerm is
// written to a file that testdata/time_eigh.py reads, and only the two
// solver calls are timed (ours: one call with a fresh Workspace, after a
// garbage collection, the transposition to the API's layout included;
// numpy: the eigvalsh / eigh call, its own copies included). The sub-benchmarks are
//
//	BenchmarkDenseAgainstNumpy/{real,complex}/n={500,1000,2000,4000}/{values,vectors}/{PureGo,LAPACK}
//
// and each reports ours-s, numpy-s and ratio = ours / numpy; numpy runs
// once per matrix and job, its time shared by the backends. Run it with
// -benchtime=1x (one call per side and per -count), for example
//
//	go test -tags lapack -run NONE -bench 'AgainstNumpy/.*/n=(500|1000)/' -benchtime 1x -count 2 ./ed/eigen/
//
// The BLAS libraries mapped into both processes are logged (with -v), to
// check that numpy and the LAPACK backend run the same OpenBLAS. Skipped
// without /usr/bin/python3 (or python3) with numpy.
func BenchmarkDenseAgainstNumpy(b *testing.B) {
	py := numpyPython()
	if py == "" {
		b.Skip("no python3 with numpy")
	}
	numpy := map[string]numpyTiming{}
	for _, kind := range []string{"real", "complex"} {
		for _, n := range []int{500, 1000, 2000, 4000} {
			for _, job := range []string{"values", "vectors"} {
				for _, be := range testBackends {
					name := fmt.Sprintf("%s/n=%d/%s/%s", kind, n, job, backendName(be))
					b.Run(name, func(b *testing.B) {
						key := fmt.Sprintf("%s/%d/%s", kind, n, job)
						np, ok := numpy[key]
						if !ok {
							np = runNumpy(b, py, kind, n, job)
							numpy[key] = np
						}
						ours := timeBackend(b, be, kind, n, job == "vectors", np)
						b.ReportMetric(ours, "ours-s")
						b.ReportMetric(np.Seconds, "numpy-s")
						b.ReportMetric(ours/np.Seconds, "ratio")
					})
				}
			}
		}
	}
}

// numpyTiming is the JSON line of testdata/time_eigh.py.
type numpyTiming struct {
	Seconds   float64  `json:"seconds"`
	Lowest    float64  `json:"lowest"`
	Highest   float64  `json:"highest"`
	Libraries []string `json:"libraries"`
	Numpy     string   `json:"numpy"`
}

// benchMatrix returns the benchmark's matrix (full, both triangles) as the
// raw little-endian bytes that time_eigh.py reads, and as Go values.
func benchMatrix(kind string, n int) ([]byte, []float64, []complex128) {
	if kind == "real" {
		a := randSym(n, 1)
		buf := make([]byte, 8*len(a))
		for i, x := range a {
			binary.LittleEndian.PutUint64(buf[8*i:], math.Float64bits(x))
		}
		return buf, a, nil
	}
	c := randHerm(n, 1)
	buf := make([]byte, 16*len(c))
	for i, z := range c {
		binary.LittleEndian.PutUint64(buf[16*i:], math.Float64bits(real(z)))
		binary.LittleEndian.PutUint64(buf[16*i+8:], math.Float64bits(imag(z)))
	}
	return buf, nil, c
}

// logLibraries logs the BLAS libraries of both sides once per run.
var logLibraries sync.Once

// runNumpy writes the matrix and times numpy on it.
func runNumpy(b *testing.B, py, kind string, n int, job string) numpyTiming {
	buf, _, _ := benchMatrix(kind, n)
	path := filepath.Join(b.TempDir(), "a.bin")
	if err := os.WriteFile(path, buf, 0o600); err != nil {
		b.Fatal(err)
	}
	out, err := exec.Command(py, "testdata/time_eigh.py", path, strconv.Itoa(n), kind, job).Output()
	if err != nil {
		b.Fatalf("time_eigh.py: %v", err)
	}
	var np numpyTiming
	if err := json.Unmarshal(out, &np); err != nil {
		b.Fatal(err)
	}
	logLibraries.Do(func() {
		b.Logf("numpy %s maps %v", np.Numpy, np.Libraries)
		b.Logf("this process maps %v", mappedLinalgLibraries())
	})
	return np
}

// timeBackend times one solve of the benchmark matrix by be and checks its
// extreme eigenvalues against numpy's (to 1e-10 of the spectral scale).
func timeBackend(b *testing.B, be Backend, kind string, n int, vectors bool, np numpyTiming) float64 {
	_, a0, c0 := benchMatrix(kind, n)
	var best time.Duration
	for b.Loop() {
		b.StopTimer()
		a, c := slices.Clone(a0), slices.Clone(c0)
		ws := new(Workspace)
		runtime.GC() // no collection of the previous case's garbage in the timed call
		b.StartTimer()
		t0 := time.Now()
		var vals []float64
		var err error
		if kind == "real" {
			vals, _, err = be.Symmetric(context.Background(), a, n, Job{Vectors: vectors}, ws)
		} else {
			vals, _, err = be.Hermitian(context.Background(), c, n, Job{Vectors: vectors}, ws)
		}
		d := time.Since(t0)
		if err != nil {
			b.Fatal(err)
		}
		scale := math.Max(math.Abs(np.Lowest), math.Abs(np.Highest))
		if math.Abs(vals[0]-np.Lowest) > 1e-10*scale || math.Abs(vals[n-1]-np.Highest) > 1e-10*scale {
			b.Fatalf("extreme eigenvalues %v, %v; numpy %v, %v", vals[0], vals[n-1], np.Lowest, np.Highest)
		}
		if best == 0 || d < best {
			best = d
		}
	}
	return best.Seconds()
}

// numpyPython returns a python interpreter that imports numpy, or "".
func numpyPython() string {
	for _, p := range []string{"/usr/bin/python3", "python3"} {
		if exec.Command(p, "-c", "import numpy").Run() == nil {
			return p
		}
	}
	return ""
}

// mappedLinalgLibraries lists the BLAS/LAPACK shared objects mapped into
// this process (Linux; nil elsewhere).
func mappedLinalgLibraries() []string {
	f, err := os.Open("/proc/self/maps")
	if err != nil {
		return nil
	}
	defer f.Close()
	seen := map[string]bool{}
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		fields := strings.Fields(sc.Text())
		if len(fields) < 6 {
			continue
		}
		p := fields[len(fields)-1]
		base := filepath.Base(p)
		for _, s := range []string{"openblas", "blas", "lapack"} {
			if strings.Contains(base, s) {
				seen[p] = true
			}
		}
	}
	return slices.Sorted(maps.Keys(seen))
}

package main

import (
	"bytes"
	"encoding/xml"
	"fmt"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// writeTaskJSON runs a task with --json and writes its stdout to dir/name.
func writeTaskJSON(t *testing.T, dir, name string, args ...string) string {
	t.Helper()
	stdout, _ := mustRun(t, append(args, "--json")...)
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, []byte(stdout), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// checkImage checks that path holds a PNG of the given size in pixels (0:
// any) or an SVG document, by its extension.
func checkImage(t *testing.T, path string, width, height int) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("the figure was not written: %v", err)
	}
	if strings.HasSuffix(strings.ToLower(path), ".svg") {
		dec := xml.NewDecoder(bytes.NewReader(b))
		for {
			tok, err := dec.Token()
			if err != nil {
				t.Fatalf("%s has no root element: %v", path, err)
			}
			if se, ok := tok.(xml.StartElement); ok {
				if se.Name.Local != "svg" {
					t.Errorf("%s: root element <%s>, want <svg>", path, se.Name.Local)
				}
				return
			}
		}
	}
	if !bytes.HasPrefix(b, []byte("\x89PNG\r\n\x1a\n")) {
		t.Fatalf("%s is not a PNG", path)
	}
	cfg, err := png.DecodeConfig(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	if width > 0 && (absInt(cfg.Width-width) > 1 || absInt(cfg.Height-height) > 1) {
		t.Errorf("%s is %dx%d pixels, want %dx%d", path, cfg.Width, cfg.Height, width, height)
	}
}

func absInt(n int) int {
	if n < 0 {
		return -n
	}
	return n
}

// pixels is the size in pixels of cm centimetres at 150 dpi.
func pixels(cm float64) int { return int(math.Round(cm / 2.54 * 150)) }

// plotOK runs frustum plot and checks the conventions: exit 0, nothing on
// stdout, the path written as the last line of stderr.
func plotOK(t *testing.T, args ...string) (stderr string) {
	t.Helper()
	code, stdout, stderr := frustum(append([]string{"plot"}, args...)...)
	if code != 0 {
		t.Fatalf("frustum plot %s: exit %d, stderr %q", strings.Join(args, " "), code, stderr)
	}
	if stdout != "" {
		t.Errorf("frustum plot %s: stdout %q, want nothing", strings.Join(args, " "), stdout)
	}
	out := ""
	for i, a := range args {
		if a == "--out" && i+1 < len(args) {
			out = args[i+1]
		}
	}
	if !strings.HasSuffix(stderr, "wrote "+out+"\n") {
		t.Errorf("frustum plot %s: stderr %q does not end with the path written", strings.Join(args, " "), stderr)
	}
	return stderr
}

func TestPlotResultFiles(t *testing.T) {
	dir := t.TempDir()
	mag := writeTaskJSON(t, dir, "m.json", "magnetization", "--cluster", demoFile, "--temps", "2,5,10", "--fields", "0:15:16")
	thermo := writeTaskJSON(t, dir, "t.json", "thermo", "--cluster", chainFile, "--temps", "log:0.5:300:30")
	fit := filepath.Join(dir, "fit.json")
	b, err := tasks.MarshalJSON(handmadeFit())
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(fit, b, 0o644)

	for _, tc := range []struct {
		args          []string
		width, height float64 // cm
	}{
		{[]string{"--input", mag}, 16, 10},
		{[]string{"--input", mag, "--groups"}, 16, 10},
		{[]string{"--input", mag, "--polarization", "--groups", "--kind", "magnetization"}, 16, 10},
		{[]string{"--input", thermo}, 16, 22},
		{[]string{"--input", thermo, "--kind", "thermo", "--width", "10", "--height", "12.5"}, 10, 12.5},
		{[]string{"--input", fit}, 18, 16},
		{[]string{"--input", fit, "--kind", "collapse"}, 16, 10},
	} {
		for _, ext := range []string{".png", ".svg"} {
			out := filepath.Join(dir, fmt.Sprintf("figure-%s%s", strings.Join(tc.args[2:], ""), ext))
			plotOK(t, append(tc.args, "--out", out)...)
			checkImage(t, out, pixels(tc.width), pixels(tc.height))
		}
	}
}

// handmadeFit is a small fit result: one model and one baseline on six
// points at two temperatures.
func handmadeFit() *frustumv1.FitResult {
	r := &frustumv1.FitResult{Observable: "polarization", Link: "global", DataName: "handmade", ValueUnit: "1", ScalingG: 2, Best: "pair"}
	pair := &frustumv1.ModelFit{Name: "pair", ReducedChiSquare: 1.2}
	free := &frustumv1.ModelFit{Name: "free spin 1/2", Baseline: true, ReducedChiSquare: 7}
	for _, T := range []float64{2, 4} {
		for _, B := range []float64{1, 3, 5} {
			x := 2 * ed.MuBOverKB * B / (2 * T)
			y := math.Tanh(x) * 0.9
			r.Temperature, r.Field, r.Value, r.Sigma, r.Scaling = append(r.Temperature, T), append(r.Field, B), append(r.Value, y), append(r.Sigma, 0.02), append(r.Scaling, x)
			pair.Curve, pair.Residual = append(pair.Curve, y+0.01), append(pair.Residual, -0.5)
			free.Curve, free.Residual = append(free.Curve, math.Tanh(x)), append(free.Residual, (y-math.Tanh(x))/0.02)
		}
	}
	r.Models = []*frustumv1.ModelFit{pair, free}
	return r
}

// TestPlotZeeman checks the crossing fields printed for the dimer of
// testdata/dimer.json, J = 10 K, g = 2: the S^z = 1 triplet level J/4 - g
// mu_B B crosses the singlet -3J/4 at g mu_B B = J (EXACT, textbook).
func TestPlotZeeman(t *testing.T) {
	dir := t.TempDir()
	want := 10 / (2 * ed.MuBOverKB)
	out := filepath.Join(dir, "z.png")
	stderr := plotOK(t, "zeeman", "--cluster", dimerFile, "--fields", "0:15:61", "--out", out)
	if line := fmt.Sprintf("ground-state crossings (T): %.4f\n", want); !strings.HasPrefix(stderr, line) {
		t.Errorf("stderr %q, want it to start with %q", stderr, line)
	}
	checkImage(t, out, pixels(16), pixels(12))

	// Along x, as an SVG, with two levels: the same crossing.
	out = filepath.Join(dir, "z.svg")
	stderr = plotOK(t, "zeeman", "--cluster", dimerFile, "--fields", "1:13:25", "--direction", "2,0,0", "--levels", "2", "--out", out)
	if line := fmt.Sprintf("ground-state crossings (T): %.4f\n", want); !strings.HasPrefix(stderr, line) {
		t.Errorf("stderr %q, want it to start with %q", stderr, line)
	}
	checkImage(t, out, 0, 0)

	// Below the crossing there is none.
	stderr = plotOK(t, "zeeman", "--cluster", dimerFile, "--fields", "0,1,2,5", "--out", filepath.Join(dir, "low.png"))
	if !strings.HasPrefix(stderr, "no ground-state crossing between 0 and 5 T\n") {
		t.Errorf("stderr %q", stderr)
	}

	// The spin-1/2 triangle of testdata/triangle-dm.json (J = 100 K, D^z =
	// 8 K, g = 2.1): the quartet's S^z = 3/2 level meets the lower doublet
	// at g mu_B B = 3J/2 + (sqrt(3)/2) D^z (PHYSICS.md, derivation).
	want = (150 + math.Sqrt(3)/2*8) / (2.1 * ed.MuBOverKB)
	stderr = plotOK(t, "zeeman", "--cluster", triangleFile, "--fields", "0:150:31", "--out", filepath.Join(dir, "dm.png"))
	if line := fmt.Sprintf("ground-state crossings (T): %.4f\n", want); !strings.HasPrefix(stderr, line) {
		t.Errorf("DM triangle: stderr %q, want it to start with %q", stderr, line)
	}
}

func TestPlotUsageErrors(t *testing.T) {
	dir := t.TempDir()
	mag := writeTaskJSON(t, dir, "m.json", "magnetization", "--cluster", dimerFile, "--temps", "2", "--fields", "0:5:6")
	thermo := writeTaskJSON(t, dir, "t.json", "thermo", "--cluster", dimerFile, "--temps", "1,2")
	outPNG := filepath.Join(dir, "out.png")
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"plot", "--out", outPNG}, "give the result: --input FILE"},
		{[]string{"plot", "--input", mag, "--job", "7f", "--out", outPNG}, "--input and --job exclude each other"},
		{[]string{"plot", "--input", mag}, "--out FILE is required"},
		{[]string{"plot", "--input", mag, "--out", filepath.Join(dir, "out.pdf")}, `unsupported file extension ".pdf"`},
		{[]string{"plot", "--input", mag, "--out", filepath.Join(dir, "out")}, "has no file extension"},
		{[]string{"plot", "--input", mag, "--out", outPNG, "--kind", "bars"}, `--kind "bars": give one of auto, magnetization, thermo, fit, collapse`},
		{[]string{"plot", "--input", mag, "--out", outPNG, "--kind", "zeeman"}, "frustum plot zeeman --cluster FILE"},
		{[]string{"plot", "--input", thermo, "--out", outPNG, "--groups"}, "--groups and --polarization apply to magnetization results"},
		{[]string{"plot", "--input", mag, "--out", outPNG, "--server", "127.0.0.1:1"}, "go with --job"},
		{[]string{"plot", "--input", mag, "--out", outPNG, "--width", "0"}, `--width "0": give a size in centimetres`},
		{[]string{"plot", "--input", mag, "--out", outPNG, "extra"}, `unexpected argument "extra"`},
		{[]string{"plot", "zeeman", "--cluster", dimerFile, "--out", outPNG}, "--fields GRID is required"},
		{[]string{"plot", "zeeman", "--cluster", dimerFile, "--fields", "3", "--out", outPNG}, "at least two fields"},
		{[]string{"plot", "zeeman", "--cluster", dimerFile, "--fields", "0,5,2", "--out", outPNG}, "--fields must increase: 2 T follows 5 T"},
		{[]string{"plot", "zeeman", "--fields", "0:5:6", "--out", outPNG}, "--cluster FILE is required"},
		{[]string{"plot", "zeeman", "--cluster", dimerFile, "--fields", "0:5:6"}, "--out FILE is required"},
		{[]string{"plot", "zeeman", "--cluster", dimerFile, "--fields", "0:5:6", "--out", outPNG, "--levels", "-2"}, `--levels "-2" is negative`},
		{[]string{"plot", "zeeman", "--cluster", dimerFile, "--fields", "0:5:6", "--out", outPNG, "--direction", "0,0,0"}, "the zero vector has no direction"},
		{[]string{"plot", "zeeman", "--cluster", dimerFile, "--fields", "0:5:6", "--out", outPNG, "--input", mag}, "unknown flag --input"},
	} {
		code, stdout, stderr := frustum(tc.args...)
		if code != 2 || stdout != "" {
			t.Errorf("frustum %s: exit %d, stdout %q; want 2 and nothing", strings.Join(tc.args, " "), code, stdout)
		}
		if !strings.Contains(stderr, tc.want) || !strings.HasPrefix(stderr, "frustum plot: ") {
			t.Errorf("frustum %s: stderr %q lacks %q", strings.Join(tc.args, " "), stderr, tc.want)
		}
		checkOneLine(t, tc.args, stderr)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 2 {
		t.Errorf("usage errors wrote files: %v", entries)
	}
}

func TestPlotFailures(t *testing.T) {
	dir := t.TempDir()
	write := func(name, content string) string {
		path := filepath.Join(dir, name)
		os.WriteFile(path, []byte(content), 0o644)
		return path
	}
	spectrum := writeTaskJSON(t, dir, "s.json", "spectrum", "--cluster", dimerFile)
	notJSON := write("not.json", `{"curves": [`)
	short := write("short.json", `{"field": [0, 1, 2], "curves": [{"temperature": 2, "magnetization": [0, 1]}]}`)
	empty := write("empty.json", `{}`)
	good := write("good.json", `{"field": [0, 1], "curves": [{"temperature": 2, "magnetization": [0, 1]}]}`)
	outPNG := filepath.Join(dir, "out.png")
	for _, tc := range []struct {
		args []string
		want []string
	}{
		{[]string{"--input", filepath.Join(dir, "missing.json"), "--out", outPNG}, []string{"--input: ", "missing.json"}},
		{[]string{"--input", notJSON, "--out", outPNG}, []string{"not.json is not a JSON object"}},
		{[]string{"--input", dimerFile, "--out", outPNG}, []string{"is not a result written by frustum TASK --json", `unknown field "name"`}},
		{[]string{"--input", spectrum, "--out", outPNG}, []string{"holds a spectrum at one field", "frustum plot zeeman"}},
		{[]string{"--input", empty, "--out", outPNG}, []string{"reads as any of FitResult, MagnetizationResult, ThermoResult, SpectrumResult: give --kind"}},
		{[]string{"--input", short, "--out", outPNG}, []string{"--input " + short + ": curves[0].magnetization: has 2 values for 3 fields"}},
		{[]string{"--input", empty, "--kind", "thermo", "--out", outPNG}, []string{"temperature: empty"}},
		{[]string{"--input", short, "--kind", "fit", "--out", outPNG}, []string{"short.json is not a FitResult", `unknown field "curves"`}},
		{[]string{"--input", good, "--out", filepath.Join(dir, "missing", "out.png")}, []string{"--out: ", "missing"}},
	} {
		args := append([]string{"plot"}, tc.args...)
		code, stdout, stderr := frustum(args...)
		if code != 1 || stdout != "" {
			t.Errorf("frustum %s: exit %d, stdout %q; want 1 and nothing", strings.Join(args, " "), code, stdout)
		}
		for _, w := range tc.want {
			if !strings.Contains(stderr, w) {
				t.Errorf("frustum %s: stderr %q lacks %q", strings.Join(args, " "), stderr, w)
			}
		}
		checkOneLine(t, args, stderr)
	}
	if _, err := os.Stat(outPNG); err == nil {
		t.Error("a failed plot left its --out file")
	}
}

// TestPlotJob draws the results of jobs on a server, inline and in chunks.
func TestPlotJob(t *testing.T) {
	f := startFake(t)
	dir := t.TempDir()
	for _, inline := range []bool{true, false} {
		f.inline = 1 << 20
		if !inline {
			f.inline = 0
		}
		name := strings.TrimSpace(mustRunOut(t, "submit", "thermo", "--cluster", dimerFile, "--temps", "log:1:100:20", "--server", f.addr))
		mustRun(t, "watch", name, "--server", f.addr)
		out := filepath.Join(dir, fmt.Sprintf("job-%v.png", inline))
		plotOK(t, "--job", strings.TrimPrefix(name, "jobs/"), "--server", f.addr, "--out", out)
		checkImage(t, out, pixels(16), pixels(22))
	}
	f.mu.Lock()
	fetched := f.results
	f.mu.Unlock()
	if fetched == 0 {
		t.Error("no result was fetched in chunks")
	}

	// A job that is still running, one cancelled, one that does not exist.
	f.hold = true
	running := strings.TrimSpace(mustRunOut(t, "submit", "thermo", "--cluster", dimerFile, "--temps", "1,2", "--server", f.addr))
	cancelled := strings.TrimSpace(mustRunOut(t, "submit", "thermo", "--cluster", dimerFile, "--temps", "1,2", "--server", f.addr))
	mustRun(t, "cancel", cancelled, "--server", f.addr)
	out := filepath.Join(dir, "never.png")
	for _, tc := range []struct {
		job, want string
	}{
		{running, running + " is RUNNING and has no result yet"},
		{cancelled, cancelled + " was cancelled"},
		{"jobs/nope", "NOT_FOUND"},
	} {
		args := []string{"plot", "--job", tc.job, "--server", f.addr, "--out", out}
		code, stdout, stderr := frustum(args...)
		if code != 1 || stdout != "" || !strings.Contains(stderr, tc.want) {
			t.Errorf("frustum %s: exit %d, stdout %q, stderr %q; want 1 and %q", strings.Join(args, " "), code, stdout, stderr, tc.want)
		}
		checkOneLine(t, args, stderr)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("a failed plot --job wrote its figure")
	}
}

func TestPlotHelp(t *testing.T) {
	stdout, _ := mustRun(t, "plot", "--help")
	for _, want := range []string{"Usage: frustum plot (--input RESULT.json | --job ID)", "frustum plot zeeman --cluster FILE", "\n  --input FILE ", "\n  --job ID ", "\n  --kind KIND ", "\n  --server HOST:PORT "} {
		if !strings.Contains(stdout, want) {
			t.Errorf("plot --help lacks %q:\n%s", want, stdout)
		}
	}
	stdout, _ = mustRun(t, "plot", "zeeman", "--help")
	for _, want := range []string{"Usage: frustum plot zeeman --cluster FILE --fields GRID", "\n  --fields GRID ", "\n  --direction x,y,z ", "\n  --levels K ", "\n  --out FILE ", "Example:\n  frustum plot zeeman "} {
		if !strings.Contains(stdout, want) {
			t.Errorf("plot zeeman --help lacks %q:\n%s", want, stdout)
		}
	}
}

package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	frustumv1 "frustum/proto/frustum/v1"
)

const (
	dimerFile    = "../../testdata/dimer.json"
	triangleFile = "../../testdata/triangle-dm.json"
	chainFile    = "../../testdata/spin1-chain.json"
	starFile     = "../../testdata/star-mixed.json"
)

// frustum runs the command line in-process.
func frustum(args ...string) (code int, stdout, stderr string) {
	var out, errOut bytes.Buffer
	code = run(args, &out, &errOut)
	return code, out.String(), errOut.String()
}

// mustRun runs args and fails the test unless they succeed.
func mustRun(t *testing.T, args ...string) (stdout, stderr string) {
	t.Helper()
	code, stdout, stderr := frustum(args...)
	if code != 0 {
		t.Fatalf("frustum %s: exit %d, stderr %q", strings.Join(args, " "), code, stderr)
	}
	return stdout, stderr
}

// checkOneLine fails unless stderr is exactly one line and no panic trace.
func checkOneLine(t *testing.T, args []string, stderr string) {
	t.Helper()
	if strings.Count(stderr, "\n") != 1 || !strings.HasSuffix(stderr, "\n") {
		t.Errorf("frustum %s: stderr is not one line: %q", strings.Join(args, " "), stderr)
	}
	if strings.Contains(stderr, "goroutine") || strings.Contains(stderr, "panic") {
		t.Errorf("frustum %s: stderr looks like a panic: %q", strings.Join(args, " "), stderr)
	}
}

func TestHelpEveryCommand(t *testing.T) {
	for _, c := range commands() {
		for _, args := range [][]string{{c.name, "--help"}, {c.name, "-h"}, {"help", c.name}} {
			code, stdout, stderr := frustum(args...)
			if code != 0 || stderr != "" {
				t.Errorf("frustum %s: exit %d, stderr %q", strings.Join(args, " "), code, stderr)
			}
			for _, want := range []string{"Usage: frustum " + c.name, "Example:\n  frustum "} {
				if !strings.Contains(stdout, want) {
					t.Errorf("frustum %s: help lacks %q:\n%s", strings.Join(args, " "), want, stdout)
				}
			}
		}
	}
	for _, args := range [][]string{{"help"}, {"--help"}, {"-h"}} {
		code, stdout, _ := frustum(args...)
		if code != 0 || !strings.Contains(stdout, "Usage: frustum COMMAND") {
			t.Errorf("frustum %s: exit %d, stdout %q", strings.Join(args, " "), code, stdout)
		}
		for _, c := range commands() {
			if !strings.Contains(stdout, "  "+c.name+" ") {
				t.Errorf("frustum %s: command %s not listed", strings.Join(args, " "), c.name)
			}
		}
	}
}

// TestHelpFlags checks that each task's help lists the flags of FORMAT.md
// plus --json, --csv, --max-memory and those of the server.
func TestHelpFlags(t *testing.T) {
	for name, flags := range map[string][]string{
		"spectrum":      {"--cluster FILE", "--field Bx,By,Bz", "--levels K"},
		"thermo":        {"--cluster FILE", "--temps GRID", "--field Bx,By,Bz"},
		"magnetization": {"--cluster FILE", "--temps GRID", "--fields GRID", "--direction x,y,z", "--powder N"},
		"fit":           {"--data FILE", "--model FILE", "--observable OBSERVABLE", "--vary NAME=PATH[,PATH...][:MIN:MAX[:START]]", "--link LINK", "--powder N"},
	} {
		stdout, _ := mustRun(t, name, "--help")
		for _, f := range append(flags, "--json", "--csv", "--max-memory SIZE", "--server HOST:PORT", "--token-file FILE", "--tls-ca FILE") {
			if !strings.Contains(stdout, "\n  "+f+" ") {
				t.Errorf("%s --help lacks the flag %q:\n%s", name, f, stdout)
			}
		}
	}
}

func TestUsageErrors(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{}, "Usage: frustum"},
		{[]string{"diagonalize"}, `unknown command "diagonalize"`},
		{[]string{"--cluster", dimerFile}, "give a command before the flag --cluster"},
		{[]string{"help", "nope"}, `unknown command "nope"`},
		{[]string{"spectrum"}, "--cluster FILE is required"},
		{[]string{"spectrum", "--bogus"}, "unknown flag --bogus"},
		{[]string{"spectrum", "-bogus"}, "unknown flag --bogus"},
		{[]string{"spectrum", "--cluster"}, "flag --cluster needs a value"},
		{[]string{"spectrum", "--cluster", dimerFile, "--powder", "10"}, "unknown flag --powder"},
		{[]string{"spectrum", "--cluster", dimerFile, "--levels", "-1"}, `--levels "-1" is negative`},
		{[]string{"spectrum", "--cluster", dimerFile, "--levels", "two"}, `--levels "two" is not a whole number`},
		{[]string{"spectrum", "--cluster", dimerFile, "--levels", "9999999999"}, "--levels"},
		{[]string{"spectrum", "--cluster", dimerFile, "--field", "1,2"}, `--field "1,2": a vector is 3 numbers`},
		{[]string{"spectrum", "--cluster", dimerFile, "--field", "1,x,2"}, `--field "1,x,2": component 2`},
		{[]string{"spectrum", "--cluster", dimerFile, "--json", "--csv"}, "--json and --csv"},
		{[]string{"spectrum", "--cluster", dimerFile, "--json=maybe"}, "--json"},
		{[]string{"spectrum", "--cluster", dimerFile, "--max-memory", "lots"}, "--max-memory"},
		{[]string{"spectrum", "--cluster", dimerFile, "--max-memory", "4 parsecs"}, `unknown unit "parsecs"`},
		{[]string{"spectrum", dimerFile}, "give the cluster file as --cluster"},
		{[]string{"spectrum", "--cluster", dimerFile, "extra"}, `unexpected argument "extra"`},
		{[]string{"thermo", "--cluster", dimerFile}, "--temps GRID is required"},
		{[]string{"thermo", "--cluster", dimerFile, "--temps", "0:15:1"}, "--temps \"0:15:1\": range count: a range needs at least 2 points, got 1"},
		{[]string{"thermo", "--cluster", dimerFile, "--temps", "1,,2"}, "--temps \"1,,2\": item 2: missing number"},
		{[]string{"thermo", "--cluster", dimerFile, "--temps", "NaN"}, "--temps \"NaN\""},
		{[]string{"thermo", "--cluster", dimerFile, "--temps", "-1,2"}, "--temps: temperatures[0]"},
		{[]string{"thermo", "--cluster", dimerFile, "--temps", "0,2"}, "--temps: temperatures[0]"},
		{[]string{"magnetization", "--cluster", dimerFile, "--temps", "2"}, "--fields GRID is required"},
		{[]string{"magnetization", "--cluster", dimerFile, "--fields", "0:1:3"}, "--temps GRID is required"},
		{[]string{"magnetization", "--cluster", dimerFile, "--temps", "2", "--fields", "log:0:1:3"}, "--fields \"log:0:1:3\": a logarithmic range needs both ends > 0"},
		{[]string{"magnetization", "--cluster", dimerFile, "--temps", "2", "--fields", "0:1:3", "--direction", "0,0,0"}, "--direction \"0,0,0\": the zero vector"},
		{[]string{"magnetization", "--cluster", dimerFile, "--temps", "-2", "--fields", "0:1:3"}, "--temps: temperatures[0]"},
		{[]string{"demo", "--json"}, "unknown flag --json"},
		{[]string{"version", "now"}, `unexpected argument "now"`},
	} {
		code, stdout, stderr := frustum(tc.args...)
		if code != 2 {
			t.Errorf("frustum %s: exit %d, want 2 (stderr %q)", strings.Join(tc.args, " "), code, stderr)
		}
		if stdout != "" {
			t.Errorf("frustum %s: stdout %q, want nothing", strings.Join(tc.args, " "), stdout)
		}
		if !strings.Contains(stderr, tc.want) {
			t.Errorf("frustum %s: stderr %q lacks %q", strings.Join(tc.args, " "), stderr, tc.want)
		}
		if len(tc.args) > 0 {
			checkOneLine(t, tc.args, stderr)
		}
	}
}

func TestFailures(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.json")
	os.WriteFile(bad, []byte(`{"sites": [{"label": "a"}, {"label": "b", "spin": 0.7}], "bonds": [{"a": "a", "b": "z", "exchange": 1}]}`), 0o644)
	notJSON := filepath.Join(dir, "not.json")
	os.WriteFile(notJSON, []byte(`{"sites": [`), 0o644)
	for _, tc := range []struct {
		args []string
		want []string
	}{
		{[]string{"spectrum", "--cluster", filepath.Join(dir, "missing.json")}, []string{"missing.json"}},
		{[]string{"spectrum", "--cluster", bad}, []string{"sites[1].spin", "bonds[0].b"}},
		{[]string{"spectrum", "--cluster", notJSON}, []string{"not.json"}},
		{[]string{"spectrum", "--cluster", chainFile, "--max-memory", "1KiB"}, []string{"memory", "--max-memory"}},
	} {
		code, stdout, stderr := frustum(tc.args...)
		if code != 1 || stdout != "" {
			t.Errorf("frustum %s: exit %d, stdout %q; want 1 and nothing", strings.Join(tc.args, " "), code, stdout)
		}
		for _, w := range tc.want {
			if !strings.Contains(stderr, w) {
				t.Errorf("frustum %s: stderr %q lacks %q", strings.Join(tc.args, " "), stderr, w)
			}
		}
		checkOneLine(t, tc.args, stderr)
	}
}

// jsonKeys returns the keys of a JSON object.
func jsonKeys(t *testing.T, raw json.RawMessage) map[string]json.RawMessage {
	t.Helper()
	var m map[string]json.RawMessage
	if err := json.Unmarshal(raw, &m); err != nil {
		t.Fatalf("not a JSON object: %v\n%s", err, raw)
	}
	return m
}

func hasKeys(t *testing.T, what string, m map[string]json.RawMessage, keys ...string) {
	t.Helper()
	for _, k := range keys {
		if _, ok := m[k]; !ok {
			t.Errorf("%s lacks the field %q", what, k)
		}
	}
}

// parseJSON checks that stdout is exactly one protojson message of m's type.
func parseJSON(t *testing.T, stdout string, m proto.Message) map[string]json.RawMessage {
	t.Helper()
	if err := protojson.Unmarshal([]byte(stdout), m); err != nil {
		t.Fatalf("stdout is not the protojson of %T: %v\n%s", m, err, stdout)
	}
	dec := json.NewDecoder(strings.NewReader(stdout))
	var raw json.RawMessage
	if err := dec.Decode(&raw); err != nil {
		t.Fatal(err)
	}
	if dec.More() {
		t.Fatalf("stdout has more than one JSON value")
	}
	return jsonKeys(t, raw)
}

func TestSpectrumJSON(t *testing.T) {
	stdout, stderr := mustRun(t, "spectrum", "--cluster", dimerFile, "--json")
	if stderr != "" {
		t.Errorf("stderr %q, want nothing", stderr)
	}
	var r frustumv1.SpectrumResult
	keys := parseJSON(t, stdout, &r)
	hasKeys(t, "spectrum result", keys, "energies", "levels", "field", "truncated", "totalStates", "engine", "clusterName")
	var levels []json.RawMessage
	json.Unmarshal(keys["levels"], &levels)
	if len(levels) == 0 {
		t.Fatal("no levels")
	}
	hasKeys(t, "level", jsonKeys(t, levels[0]), "energy", "degeneracy", "totalSpin")
	// The dimer, H = J S1.S2 with J = 10 K: singlet -3J/4, triplet J/4 (EXACT, textbook).
	want := []float64{-7.5, 2.5, 2.5, 2.5}
	if len(r.GetEnergies()) != 4 {
		t.Fatalf("energies %v, want %v", r.GetEnergies(), want)
	}
	for i, e := range r.GetEnergies() {
		if math.Abs(e-want[i]) > 1e-9 {
			t.Errorf("energies[%d] = %v, want %v", i, e, want[i])
		}
	}
	if r.GetTotalStates() != 4 || r.GetTruncated() {
		t.Errorf("totalStates %d, truncated %v", r.GetTotalStates(), r.GetTruncated())
	}
	if len(r.GetLevels()) != 2 || r.GetLevels()[1].GetDegeneracy() != 3 || r.GetLevels()[1].GetTotalSpin() != 1 {
		t.Errorf("levels %v, want a singlet and a triplet", r.GetLevels())
	}
	if e := r.GetEngine(); e.GetMethod() == "" || e.GetSolver() == "" || e.GetDimension() != 4 || len(e.GetSectors()) == 0 {
		t.Errorf("engine report not filled: %v", e)
	}
}

func TestSpectrumLevelsAndField(t *testing.T) {
	// --field before or after --cluster, with = or a separate value, negative.
	for _, args := range [][]string{
		{"spectrum", "--cluster", dimerFile, "--field", "-1,0,0", "--levels", "1", "--json"},
		{"spectrum", "--field=-1,0,0", "-levels=1", "-json", "-cluster", dimerFile},
	} {
		stdout, _ := mustRun(t, args...)
		var r frustumv1.SpectrumResult
		parseJSON(t, stdout, &r)
		if !slices.Equal(r.GetField(), []float64{-1, 0, 0}) {
			t.Errorf("%v: field %v, want [-1 0 0]", args, r.GetField())
		}
		if !r.GetTruncated() || len(r.GetEnergies()) != 1 {
			t.Errorf("%v: truncated %v, energies %v; want the lowest one", args, r.GetTruncated(), r.GetEnergies())
		}
	}
}

func TestThermoGrids(t *testing.T) {
	for _, tc := range []struct {
		grid string
		want []float64
	}{
		{"5", []float64{5}},
		{"1,2,5", []float64{1, 2, 5}},
		{"0.5:2:4", []float64{0.5, 1, 1.5, 2}},
		{"log:1:100:3", []float64{1, 10, 100}},
	} {
		stdout, _ := mustRun(t, "thermo", "--cluster", dimerFile, "--temps", tc.grid, "--json")
		var r frustumv1.ThermoResult
		keys := parseJSON(t, stdout, &r)
		hasKeys(t, "thermo result", keys, "temperature", "energy", "specificHeat", "entropy", "magnetization", "susceptibility", "field", "engine")
		got := r.GetTemperature()
		if len(got) != len(tc.want) {
			t.Fatalf("--temps %s: temperature %v, want %v", tc.grid, got, tc.want)
		}
		for i := range got {
			if math.Abs(got[i]-tc.want[i]) > 1e-12*tc.want[i] {
				t.Errorf("--temps %s: temperature %v, want %v", tc.grid, got, tc.want)
			}
		}
		for name, v := range map[string][]float64{"energy": r.GetEnergy(), "specificHeat": r.GetSpecificHeat(),
			"entropy": r.GetEntropy(), "magnetization": r.GetMagnetization(), "susceptibility": r.GetSusceptibility()} {
			if len(v) != len(got) {
				t.Errorf("--temps %s: %s has %d values for %d temperatures", tc.grid, name, len(v), len(got))
			}
		}
	}
}

// TestThermoDimerSusceptibility checks the dimer's susceptibility end to end:
// chi = (2 g^2 mu_B^2 / k_B T) / (3 + e^{J/k_B T}) per dimer (EXACT, textbook),
// in mu_B/T: chi = 2 g^2 (mu_B/k_B) / (T (3 + e^{J/T})).
func TestThermoDimerSusceptibility(t *testing.T) {
	stdout, _ := mustRun(t, "thermo", "--cluster", dimerFile, "--temps", "2,6.236180146,20", "--json")
	var r frustumv1.ThermoResult
	parseJSON(t, stdout, &r)
	const g, J, muBOverKB = 2.0, 10.0, 0.67171381563
	for i, T := range r.GetTemperature() {
		want := 2 * g * g * muBOverKB / (T * (3 + math.Exp(J/T)))
		if got := r.GetSusceptibility()[i]; math.Abs(got-want) > 1e-7*want {
			t.Errorf("chi(%v K) = %v, want %v", T, got, want)
		}
	}
}

func TestMagnetizationJSON(t *testing.T) {
	stdout, stderr := mustRun(t, "magnetization", "--cluster", starFile, "--temps", "0.5,2", "--fields", "0:30:31", "--json")
	if stderr != "" {
		t.Errorf("stderr %q, want nothing", stderr)
	}
	var r frustumv1.MagnetizationResult
	keys := parseJSON(t, stdout, &r)
	hasKeys(t, "magnetization result", keys, "field", "curves", "direction", "saturation", "engine")
	var curves []json.RawMessage
	json.Unmarshal(keys["curves"], &curves)
	if len(curves) != 2 {
		t.Fatalf("%d curves, want 2", len(curves))
	}
	ck := jsonKeys(t, curves[0])
	hasKeys(t, "curve", ck, "temperature", "magnetization", "groups")
	gk := jsonKeys(t, ck["groups"])
	hasKeys(t, "groups", gk, "arms", "centre")
	hasKeys(t, "group curve", jsonKeys(t, gk["arms"]), "values")
	if len(r.GetField()) != 31 || r.GetField()[30] != 30 {
		t.Errorf("field %v, want 0..30 in 31 points", r.GetField())
	}
	for _, c := range r.GetCurves() {
		if len(c.GetMagnetization()) != 31 {
			t.Errorf("T = %v: %d values", c.GetTemperature(), len(c.GetMagnetization()))
		}
		for i := range c.GetMagnetization() {
			sum := c.GetGroups()["arms"].GetValues()[i] + c.GetGroups()["centre"].GetValues()[i]
			if math.Abs(sum-c.GetMagnetization()[i]) > 1e-9 {
				t.Errorf("T = %v, B = %v: groups add to %v, M = %v", c.GetTemperature(), r.GetField()[i], sum, c.GetMagnetization()[i])
			}
		}
	}
	// Star of a spin-5/2 centre and four spin-1/2 arms, g = 2: saturation
	// g (5/2 + 4/2) = 9 mu_B.
	if math.Abs(r.GetSaturation()-9) > 1e-12 {
		t.Errorf("saturation %v, want 9", r.GetSaturation())
	}
}

func readCSV(t *testing.T, stdout string) [][]string {
	t.Helper()
	rows, err := csv.NewReader(strings.NewReader(stdout)).ReadAll()
	if err != nil {
		t.Fatalf("not CSV: %v\n%s", err, stdout)
	}
	if len(rows) == 0 {
		t.Fatal("empty CSV")
	}
	for i, row := range rows[1:] {
		for j, cell := range row {
			if cell == "" {
				continue
			}
			if _, err := strconv.ParseFloat(cell, 64); err != nil {
				t.Errorf("row %d column %q: %q is not a number", i+1, rows[0][j], cell)
			}
		}
	}
	return rows
}

func TestCSV(t *testing.T) {
	stdout, _ := mustRun(t, "thermo", "--cluster", dimerFile, "--temps", "log:0.5:300:20", "--csv")
	rows := readCSV(t, stdout)
	if want := []string{"T (K)", "E (K)", "C (k_B)", "S (k_B)", "M (mu_B)", "chi (mu_B/T)"}; !slices.Equal(rows[0], want) {
		t.Errorf("thermo header %q, want %q", rows[0], want)
	}
	if len(rows) != 21 {
		t.Errorf("thermo: %d rows, want header + 20", len(rows))
	}

	stdout, _ = mustRun(t, "magnetization", "--cluster", starFile, "--temps", "1,5", "--fields", "0:20:11", "--csv")
	rows = readCSV(t, stdout)
	want := []string{"B (T)",
		"M (mu_B) at T=1 K", "M[arms] (mu_B) at T=1 K", "M[centre] (mu_B) at T=1 K",
		"M (mu_B) at T=5 K", "M[arms] (mu_B) at T=5 K", "M[centre] (mu_B) at T=5 K"}
	if !slices.Equal(rows[0], want) {
		t.Errorf("magnetization header %q, want %q", rows[0], want)
	}
	if len(rows) != 12 || rows[11][0] != "20" {
		t.Errorf("magnetization: %d rows, last %q", len(rows), rows[len(rows)-1])
	}

	stdout, _ = mustRun(t, "spectrum", "--cluster", triangleFile, "--csv")
	rows = readCSV(t, stdout)
	if rows[0][1] != "E (K)" || rows[0][2] != "E - E0 (K)" {
		t.Errorf("spectrum header %q", rows[0])
	}
}

func TestTables(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want []string
	}{
		{[]string{"spectrum", "--cluster", triangleFile}, []string{"E (K)", "E - E0 (K)", "degeneracy", "Engine:", "Sectors:", "Memory:"}},
		{[]string{"thermo", "--cluster", chainFile, "--temps", "1,10,100"}, []string{"T (K)", "C (k_B)", "S (k_B)", "chi (mu_B/T)", "Engine:"}},
		{[]string{"magnetization", "--cluster", starFile, "--temps", "0,2", "--fields", "0:10:3", "--direction", "1,1,0"},
			[]string{"T = 0 K", "T = 2 K", "B (T)", "M (mu_B)", "M[centre] (mu_B)", "M[arms] (mu_B)", "Engine:", "Eigenvectors: ", " skipped (those states carry at most "}},
	} {
		stdout, _ := mustRun(t, tc.args...)
		for _, w := range tc.want {
			if !strings.Contains(stdout, w) {
				t.Errorf("frustum %s: output lacks %q:\n%s", strings.Join(tc.args, " "), w, stdout)
			}
		}
	}
}

// TestTestdata runs the spectrum of every cluster file in testdata and checks
// the closed forms that the files are there to show.
func TestTestdata(t *testing.T) {
	files, _ := filepath.Glob("../../testdata/*.json")
	if len(files) < 5 {
		t.Fatalf("testdata has %d cluster files", len(files))
	}
	ground := map[string]float64{
		// -3J/4 - (sqrt(3)/2)|D| for the DM triangle, J = 100 K, D^z = 8 K (EXACT, derivation).
		"triangle-dm.json": -75 - math.Sqrt(3)/2*8,
		// Star, centre s0 = 5/2 and n = 4 arms, J = 15 K (EXACT, Kambe spectrum):
		// E(S, L) = (J/2)[S(S+1) - L(L+1) - s0(s0+1)], lowest at L = n/2 and
		// S = s0 - n/2 = 1/2 since s0 > n/2, so E0 = -J (n/2) (s0 + 1).
		"star-mixed.json": -15 * 2 * 3.5,
		"dimer.json":      -7.5,
	}
	for _, f := range files {
		stdout, _ := mustRun(t, "spectrum", "--cluster", f, "--levels", "1", "--json")
		var r frustumv1.SpectrumResult
		parseJSON(t, stdout, &r)
		if want, ok := ground[filepath.Base(f)]; ok {
			if got := r.GetEnergies()[0]; math.Abs(got-want) > 1e-9 {
				t.Errorf("%s: ground state %v K, want %v K", f, got, want)
			}
		}
	}
}

func TestDemo(t *testing.T) {
	dir := t.TempDir()
	stdout, stderr := mustRun(t, "demo", "--plots", dir)
	if stderr != "" {
		t.Errorf("demo stderr %q", stderr)
	}
	for _, w := range []string{"INVENTED", "frustumite", "E (K)", "degeneracy", "impurity M (mu_B)", "free spin-1/2", "B (T)", "Engine:",
		"Measurements (INVENTED)", "chi2/dof", "AIC", "Best (lowest AIC): frustumite", "Jd = ", "Pictures in " + dir} {
		if !strings.Contains(stdout, w) {
			t.Errorf("demo output lacks %q:\n%s", w, stdout)
		}
	}
	for _, f := range []string{"magnetization.png", "zeeman.png", "fit.png", "collapse.png"} {
		b, err := os.ReadFile(filepath.Join(dir, f))
		if err != nil || !bytes.HasPrefix(b, []byte("\x89PNG")) {
			t.Errorf("%s: %v (%d bytes)", f, err, len(b))
		}
	}
}

func TestVersion(t *testing.T) {
	for _, args := range [][]string{{"version"}, {"--version"}} {
		stdout, _ := mustRun(t, args...)
		if !strings.Contains(stdout, "frustum "+version) || !strings.Contains(stdout, "dense solver: ") {
			t.Errorf("frustum %s: %q", strings.Join(args, " "), stdout)
		}
	}
}

func TestParseSize(t *testing.T) {
	for in, want := range map[string]int64{"4GiB": 4 << 30, "512MiB": 512 << 20, "1.5KiB": 1536, "2GB": 2e9, "1000": 1000, "64 mib": 64 << 20} {
		if got, err := parseSize(in); err != nil || got != want {
			t.Errorf("parseSize(%q) = %d, %v; want %d", in, got, err, want)
		}
	}
	for _, in := range []string{"", "-1GiB", "0", "4 parsecs", "GiB", "1e3", "99999999TiB"} {
		if _, err := parseSize(in); err == nil {
			t.Errorf("parseSize(%q): no error", in)
		}
	}
}

// TestStarSteps checks the T = 0 magnetization plateaus of the mixed-spin
// star end to end: centre s0 = 5/2, n = 4 arms, J = 15 K, g = 2; the total
// spin goes from s0 - n/2 = 1/2 up by one at g mu_B B / k_B = J (s0 - n/2 + k),
// k = 1..4, that is B = 16.75, 27.92, 39.08, 50.25 T (EXACT, Kambe spectrum).
func TestStarSteps(t *testing.T) {
	stdout, _ := mustRun(t, "magnetization", "--cluster", starFile, "--temps", "0", "--fields", "10,22,33,45,60", "--json")
	var r frustumv1.MagnetizationResult
	parseJSON(t, stdout, &r)
	want := []float64{1, 3, 5, 7, 9} // g S for S = 1/2 .. 9/2
	got := r.GetCurves()[0].GetMagnetization()
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-9 {
			t.Errorf("M(%v T) = %v mu_B, want %v", r.GetField()[i], got[i], want[i])
		}
	}
}

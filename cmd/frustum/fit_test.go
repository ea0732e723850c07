package main

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	frustumv1 "frustum/proto/frustum/v1"
)

const demoData = "../../testdata/demo-data.csv"

// The demo's invented data come from a hidden heptamer (demodata_test.go):
// the fit of --json finds its defect exchange and centre g within a few of
// its reported errors, prefers it to both free spins by AIC, and prints
// the contract's fields (common practice, no source: recovery of the
// generating parameters).
func TestFitDemoDataJSON(t *testing.T) {
	args := []string{"fit", "--data", demoData, "--model", demoFile, "--vary", "Jd=" + demoDefectBondPaths + ":0:60", "--vary", "gc=sites[0].g:1.8:2.6", "--json"}
	stdout, _ := mustRun(t, args...)
	var r frustumv1.FitResult
	keys := parseJSON(t, stdout, &r)
	hasKeys(t, "FitResult", keys, "models", "best", "scaling", "temperature", "field", "value", "sigma")
	if len(r.GetModels()) != 3 || r.GetModels()[1].GetName() != "free spin 1/2" || r.GetModels()[2].GetName() != "free spin 1" {
		t.Fatalf("models: %v", r.GetModels())
	}
	m := r.GetModels()[0]
	if r.GetBest() != m.GetName() {
		t.Errorf("best %q, want the heptamer", r.GetBest())
	}
	h := demoHidden.params
	for i, want := range []float64{h.JDefect, h.GCentre} {
		p := m.GetParameters()[i]
		if math.Abs(p.GetValue()-want) > 4*p.GetError() {
			t.Errorf("%s = %v +- %v, the hidden model has %v", p.GetName(), p.GetValue(), p.GetError(), want)
		}
	}
	if rc := m.GetReducedChiSquare(); rc < 0.6 || rc > 1.5 {
		t.Errorf("reduced chi-square %v", rc)
	}
	if len(m.GetCurve()) != len(r.GetValue()) || len(r.GetScaling()) != len(r.GetValue()) {
		t.Errorf("curve %d, scaling %d, points %d", len(m.GetCurve()), len(r.GetScaling()), len(r.GetValue()))
	}
}

func TestFitTableAndCSV(t *testing.T) {
	stdout, _ := mustRun(t, "fit", "--data", demoData, "--model", demoFile, "--vary", "Jd="+demoDefectBondPaths+":0:60")
	for _, want := range []string{"chi2/dof", "AIC", "BIC", "free spin 1/2", "Jd = ", " K", "Best (lowest AIC): frustumite"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("table lacks %q:\n%s", want, stdout)
		}
	}
	stdout, _ = mustRun(t, "fit", "--data", demoData, "--model", demoFile, "--csv")
	rows := readCSV(t, stdout)
	if len(rows) != 85 || rows[0][0] != "T_K" || rows[0][4] != "x" || len(rows[0]) != 5+2*3 {
		t.Errorf("CSV: %d rows, header %v", len(rows), rows[0])
	}
}

func TestFitErrors(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.csv")
	if err := os.WriteFile(bad, []byte("T_K,B_T,y\n1,2,3\n-1,2,3\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"fit", "--model", demoFile}, exitUsage, "--data FILE.csv is required"},
		{[]string{"fit", "--data", demoData, "--vary", "J"}, exitUsage, "NAME=PATH"},
		{[]string{"fit", "--data", demoData, "--vary", "J=bonds[0].exchange:1"}, exitUsage, "MIN:MAX"},
		{[]string{"fit", "--data", demoData, "--vary", "J=bonds[0].exchange:a:2"}, exitUsage, "not a finite number"},
		{[]string{"fit", "--data", demoData, "--observable", "entropy"}, exitUsage, "unknown observable"},
		{[]string{"fit", "--data", demoData, "--link", "local"}, exitUsage, "unknown link"},
		{[]string{"fit", "--data", demoData, "--powder", "6", "--direction", "1,0,0"}, exitUsage, "--powder"},
		{[]string{"fit", "--data", bad}, exitFailure, "bad.csv:3: column T_K"},
		{[]string{"fit", "--data", demoData, "--model", demoFile, "--vary", "J=bonds[0].exchang"}, exitUsage, "--vary: vary[0].paths[0]"},
		{[]string{"fit", "--data", demoData, "--model", demoFile, "--vary", "J=bonds[40].exchange"}, exitUsage, "applies to none of the models"},
		{[]string{"fit", "--data", demoData, "--model", "nowhere.json"}, exitFailure, "--model"},
		{[]string{"fit", "--data", demoData, "--model", demoFile, "--observable", "moment:nowhere"}, exitFailure, "models[0]"},
	} {
		code, _, stderr := frustum(c.args...)
		if code != c.code || !strings.Contains(stderr, c.want) {
			t.Errorf("frustum %s: exit %d, stderr %q; want exit %d and %q", strings.Join(c.args, " "), code, stderr, c.code, c.want)
		}
		checkOneLine(t, c.args, stderr)
	}
}

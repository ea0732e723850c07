package tasks

import (
	"encoding/json"
	"maps"
	"math"
	"slices"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	"frustum/compare"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// keysOf marshals m with MarshalJSON and returns its top-level object.
func keysOf(t *testing.T, m proto.Message) map[string]json.RawMessage {
	t.Helper()
	b, err := MarshalJSON(m)
	if err != nil {
		t.Fatal(err)
	}
	var out map[string]json.RawMessage
	if err := json.Unmarshal(b, &out); err != nil {
		t.Fatalf("MarshalJSON output is not JSON: %v\n%s", err, b)
	}
	return out
}

func object(t *testing.T, raw json.RawMessage) map[string]json.RawMessage {
	t.Helper()
	var out map[string]json.RawMessage
	if err := json.Unmarshal(raw, &out); err != nil {
		t.Fatalf("not an object: %s", raw)
	}
	return out
}

func firstOf(t *testing.T, raw json.RawMessage) json.RawMessage {
	t.Helper()
	var list []json.RawMessage
	if err := json.Unmarshal(raw, &list); err != nil || len(list) == 0 {
		t.Fatalf("not a non-empty list: %s", raw)
	}
	return list[0]
}

func wantKeys(t *testing.T, what string, got map[string]json.RawMessage, want ...string) {
	t.Helper()
	if k := slices.Sorted(maps.Keys(got)); !slices.Equal(k, slices.Sorted(slices.Values(want))) {
		t.Errorf("%s has the fields %q, want %q", what, k, slices.Sorted(slices.Values(want)))
	}
}

// TestJSONFieldNames checks the protojson names against FORMAT.md's
// "Fields of the results that scripts rely on".
func TestJSONFieldNames(t *testing.T) {
	spec := keysOf(t, SpectrumResultToProto("x", &ed.SpectrumResult{
		Energies: []float64{-1}, Levels: []ed.Level{{Energy: -1, Degeneracy: 1, HasSz: true, HasTotalSpin: true}}, Report: sampleReport(),
	}))
	wantKeys(t, "SpectrumResult", spec, "clusterName", "field", "energies", "levels", "truncated", "totalStates", "engine", "residuals", "groundState")
	wantKeys(t, "Level", object(t, firstOf(t, spec["levels"])), "energy", "degeneracy", "sz", "totalSpin")
	wantKeys(t, "EngineReport", object(t, spec["engine"]), "method", "route", "dimension", "sectors", "complex",
		"memoryBytes", "diagonalizations", "solver", "warnings", "matvecs", "symmetry",
		"eigenvectors", "eigenvectorsSkipped", "neglectedWeight")
	wantKeys(t, "Sector", object(t, firstOf(t, object(t, spec["engine"])["sectors"])), "label", "sz", "dimension")

	thermo := keysOf(t, ThermoResultToProto("x", &ed.ThermoResult{Temperature: []float64{1}}))
	wantKeys(t, "ThermoResult", thermo, "clusterName", "field", "temperature", "energy", "specificHeat", "entropy",
		"magnetization", "susceptibility", "susceptibilityDirection", "engine",
		"energyError", "specificHeatError", "entropyError", "magnetizationError", "susceptibilityError")

	mag := keysOf(t, MagnetizationResultToProto("x", &ed.MagnetizationResult{
		Field:  []float64{0, 1},
		Curves: []ed.Curve{{Temperature: 2, Magnetization: []float64{0, 1}, Groups: map[string][]float64{"impurity": {0, 0.5}}}},
	}))
	// powder is null for one direction (an unset message field).
	wantKeys(t, "MagnetizationResult", mag, "clusterName", "field", "direction", "curves", "saturation", "engine", "groupSaturation", "powder")
	curve := object(t, firstOf(t, mag["curves"]))
	wantKeys(t, "MagnetizationCurve", curve, "temperature", "magnetization", "groups", "susceptibility", "magnetizationError", "susceptibilityError")
	wantKeys(t, "groups", object(t, curve["groups"]), "impurity")
	wantKeys(t, "GroupCurve", object(t, object(t, curve["groups"])["impurity"]), "values")

	// The fit's contract: models[] with name, chiSquare, reducedChiSquare,
	// aic, bic, parameters[] (name, value, error), the link coefficients
	// and the curve at every point.
	fit := keysOf(t, FitResultToProto(&compare.Result{
		Observable: compare.Observable{Kind: compare.Polarization},
		Data:       &compare.Data{Name: "d", Temperature: []float64{1}, Field: []float64{1}, Value: []float64{1}, ValueUnit: "1"},
		Models: []compare.ModelResult{{Name: "m", Parameters: []compare.ParameterValue{{Name: "J", Value: 1, Error: 0.1, Unit: "K"}},
			Links: []compare.Link{{Temperature: math.NaN(), Scale: 1}}, Curve: []float64{1}}},
	}))
	wantKeys(t, "FitResult", fit, "observable", "link", "dataName", "temperature", "field", "value", "sigma", "valueUnit",
		"scaling", "scalingG", "models", "best", "warnings")
	model := object(t, firstOf(t, fit["models"]))
	for _, k := range []string{"name", "chiSquare", "reducedChiSquare", "aic", "bic", "parameters", "links", "curve"} {
		if _, ok := model[k]; !ok {
			t.Errorf("ModelFit lacks %q", k)
		}
	}
	wantKeys(t, "FittedParameter", object(t, firstOf(t, model["parameters"])), "name", "value", "error", "unit", "paths", "atBound")
	wantKeys(t, "LinkCoefficients", object(t, firstOf(t, model["links"])), "scale", "scaleError", "offset", "offsetError")
}

func TestMarshalJSONOptions(t *testing.T) {
	b, err := MarshalJSON(&frustumv1.SpectrumResult{})
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	// EmitUnpopulated: empty lists and zero numbers are present.
	for _, w := range []string{`"energies"`, `"levels"`, `"truncated"`, `"totalStates"`, `"clusterName"`} {
		if !strings.Contains(s, w) {
			t.Errorf("empty result lacks %s:\n%s", w, s)
		}
	}
	if !strings.HasPrefix(s, "{\n  \"") || !strings.HasSuffix(s, "}\n") {
		t.Errorf("not multiline with two-space indentation and a final newline:\n%q", s)
	}
	if strings.Contains(s, "cluster_name") {
		t.Error("proto names used instead of lowerCamelCase")
	}
	// An unset optional quantum number stays absent.
	b, _ = MarshalJSON(LevelToProto(ed.Level{Energy: 1, Degeneracy: 2}))
	if strings.Contains(string(b), "sz") || strings.Contains(string(b), "totalSpin") {
		t.Errorf("unset sz/totalSpin printed: %s", b)
	}
	// And the output reads back.
	var back frustumv1.Level
	if err := protojson.Unmarshal(b, &back); err != nil || back.GetDegeneracy() != 2 {
		t.Errorf("read back: %v, %v", &back, err)
	}
	o := JSONOptions()
	if !o.Multiline || o.Indent != "  " || !o.EmitUnpopulated || o.UseProtoNames {
		t.Errorf("JSONOptions() = %+v", o)
	}
}

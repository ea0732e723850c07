package cluster

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	frustumv1 "frustum/proto/frustum/v1"
)

// manySites returns the JSON list of n sites "x0".."x{n-1}" of the given spin.
func manySites(n int, spin string) string {
	parts := make([]string, n)
	for i := range parts {
		parts[i] = fmt.Sprintf(`{"label": "x%d", "spin": %s}`, i, spin)
	}
	return "[" + strings.Join(parts, ",") + "]"
}

// Two sites a, b and the bonds and symmetries of each case. Every case has
// exactly one problem, reported first at path with a reason containing
// reason. file marks errors of the file itself (no FieldErrors).
var badClusters = []struct {
	name   string
	json   string
	path   string
	reason string
	file   bool
}{
	// The file itself.
	{"syntax", `{"sites": [`, "", "cluster file: ", true},
	{"empty file", ``, "", "cluster file: empty", true},
	{"blank file", " \n", "", "cluster file: empty", true},
	{"not an object", `[1, 2]`, "", "cluster file: ", true},
	{"unknown field", `{"sites": [{"label": "a", "spinn": 1}]}`, "", `unknown field "spinn"`, true},
	{"unknown top field", `{"site": []}`, "", `unknown field "site"`, true},
	{"wrong type", `{"sites": [{"label": "a", "spin": "half"}]}`, "", "cluster file: ", true},
	{"duplicate field", `{"sites": [{"label": "a", "label": "b"}]}`, "", "cluster file: ", true},

	// Sites.
	{"no sites", `{"name": "empty"}`, "sites", "no sites", false},
	{"empty site list", `{"sites": []}`, "sites", "no sites", false},
	{"empty label", `{"sites": [{"label": "a"}, {"label": ""}]}`, "sites[1].label", "missing", false},
	{"absent label", `{"sites": [{"spin": 1}]}`, "sites[0].label", "missing", false},
	{"duplicate label", `{"sites": [{"label": "a"}, {"label": "a"}]}`, "sites[1].label", `duplicate label "a" (first given as sites[0])`, false},
	{"spin 0.7", `{"sites": [{"label": "a"}, {"label": "b"}, {"label": "c", "spin": 0.7}]}`, "sites[2].spin", "0.7 is not a positive multiple of 1/2", false},
	{"spin 0", `{"sites": [{"label": "a", "spin": 0}]}`, "sites[0].spin", "0 is not a positive multiple of 1/2", false},
	{"spin negative", `{"sites": [{"label": "a", "spin": -0.5}]}`, "sites[0].spin", "-0.5 is not a positive multiple of 1/2", false},
	{"spin almost half", `{"sites": [{"label": "a", "spin": 0.5000001}]}`, "sites[0].spin", "not a positive multiple of 1/2", false},
	{"spin too large", `{"sites": [{"label": "a", "spin": 50.5}]}`, "sites[0].spin", "too large: 2S = 101, and the limit is 2S <= 100", false},
	{"spin absurd", `{"sites": [{"label": "a", "spin": 1e300}]}`, "sites[0].spin", "too large", false},
	{"spin NaN", `{"sites": [{"label": "a", "spin": "NaN"}]}`, "sites[0].spin", "NaN is not a finite number", false},
	{"spin infinite", `{"sites": [{"label": "a", "spin": "Infinity"}]}`, "sites[0].spin", "+Inf is not a finite number", false},
	{"g NaN", `{"sites": [{"label": "a", "g": "NaN"}]}`, "sites[0].g", "NaN is not a finite number", false},
	{"g infinite", `{"sites": [{"label": "a", "g": "-Infinity"}]}`, "sites[0].g", "-Inf is not a finite number", false},
	{"gTensor 4", `{"sites": [{"label": "a"}, {"label": "b", "gTensor": [2, 0, 0, 2]}]}`, "sites[1].gTensor", "has 4 numbers, want 9", false},
	{"gTensor 10", `{"sites": [{"label": "a", "gTensor": [2,0,0, 0,2,0, 0,0,2, 0]}]}`, "sites[0].gTensor", "has 10 numbers, want 9", false},
	{"gTensor NaN", `{"sites": [{"label": "a", "gTensor": [2,0,0, 0,"NaN",0, 0,0,2]}]}`, "sites[0].gTensor[4]", "NaN is not a finite number", false},
	{"singleIon NaN", `{"sites": [{"label": "a", "spin": 1, "singleIon": "NaN"}]}`, "sites[0].singleIon", "NaN is not a finite number", false},
	{"singleIon on spin 1/2", `{"sites": [{"label": "a", "singleIon": 3.5}]}`, "sites[0].singleIon", "constant that only shifts every level", false},
	{"singleIon on default spin", `{"sites": [{"label": "a", "spin": 0.5, "singleIon": -1}]}`, "sites[0].singleIon", "spin-1/2 site", false},
	{"position 2", `{"sites": [{"label": "a", "position": [0, 1]}]}`, "sites[0].position", "has 2 numbers, want 3", false},
	{"position 4", `{"sites": [{"label": "a", "position": [0, 1, 2, 3]}]}`, "sites[0].position", "has 4 numbers, want 3", false},
	{"position infinite", `{"sites": [{"label": "a", "position": [0, 1, "-Infinity"]}]}`, "sites[0].position[2]", "-Inf is not a finite number", false},
	{"dimension", `{"sites": ` + manySites(63, "0.5") + `}`, "sites", "63 sites give a Hilbert space of dimension 2^63.0, more than the limit of 2^62", false},
	{"dimension mixed", `{"sites": ` + manySites(30, "2.5") + `}`, "sites", "30 sites give a Hilbert space of dimension 2^77.5", false},
	{"dimension memory", `{"sites": ` + manySites(70, "0.5") + `}`, "sites", "would need 2^74.0 bytes", false},

	// Bonds.
	{"unknown bond site", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "t9", "exchange": 1}]}`, "bonds[0].b", `unknown site "t9"`, false},
	{"unknown bond site a", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "exchange": 1}, {"a": "q", "b": "b", "exchange": 1}]}`, "bonds[1].a", `unknown site "q"`, false},
	{"missing bond site", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"b": "b", "exchange": 1}]}`, "bonds[0].a", "missing", false},
	{"self bond", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "b", "b": "b", "exchange": 1}]}`, "bonds[0]", `site "b" is bonded to itself`, false},
	{"repeated bond", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "exchange": 1}, {"a": "a", "b": "b", "dm": [0, 0, 1]}]}`, "bonds[1]", "repeated bond a-b (first given as bonds[0])", false},
	{"repeated reversed bond", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "exchange": 1}, {"a": "b", "b": "a", "exchange": 1}]}`, "bonds[1]", "repeated bond b-a (first given as bonds[0]): a-b and b-a are the same bond", false},
	{"no coupling", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b"}]}`, "bonds[0]", "has no coupling", false},
	{"exchange NaN", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "exchange": "NaN"}]}`, "bonds[0].exchange", "NaN is not a finite number", false},
	{"exchangeZ infinite", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "exchangeZ": "Infinity"}]}`, "bonds[0].exchangeZ", "+Inf is not a finite number", false},
	{"dm 2", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "dm": [0, 1]}]}`, "bonds[0].dm", "has 2 numbers, want 3", false},
	{"dm NaN", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "dm": [0, "NaN", 1]}]}`, "bonds[0].dm[1]", "NaN is not a finite number", false},
	{"tensor 8", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "tensor": [1,0,0, 0,1,0, 0,0]}]}`, "bonds[0].tensor", "has 8 numbers, want 9", false},
	{"tensor infinite", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "tensor": [1,0,0, 0,1,0, 0,0,"Infinity"]}]}`, "bonds[0].tensor[8]", "+Inf is not a finite number", false},

	// Symmetries.
	{"permutation length", `{"sites": [{"label": "a"}, {"label": "b"}], "symmetries": [{"name": "swap", "permutation": ["b"]}]}`, "symmetries[0].permutation", "has 1 label, want 2", false},
	{"permutation unknown", `{"sites": [{"label": "a"}, {"label": "b"}], "symmetries": [{"name": "swap", "permutation": ["b", "q"]}]}`, "symmetries[0].permutation[1]", `unknown site "q"`, false},
	{"permutation repeated", `{"sites": [{"label": "a"}, {"label": "b"}], "symmetries": [{"name": "swap", "permutation": ["b", "b"]}]}`, "symmetries[0].permutation[1]", `site "b" is already the image of "a" (permutation[0])`, false},
	{"permutation spins", `{"sites": [{"label": "a"}, {"label": "b", "spin": 1}], "symmetries": [{"name": "swap", "permutation": ["b", "a"]}]}`, "symmetries[0]", `"swap" does not commute with H: site a (spin 1/2) maps onto b (spin 1)`, false},
	{"permutation g", `{"sites": [{"label": "a"}, {"label": "b", "gTensor": [2,0,0, 0,2,0, 0,0,2.1]}], "symmetries": [{"name": "swap", "permutation": ["b", "a"]}]}`, "symmetries[0]", "g tensors differ: g^zz is 2 on a and 2.1 on b", false},
	{"permutation single ion", `{"sites": [{"label": "a", "spin": 1, "singleIon": 2}, {"label": "b", "spin": 1}], "symmetries": [{"permutation": ["b", "a"]}]}`, "symmetries[0]", "the permutation does not commute with H: site a maps onto b, but their single-ion terms differ: A is 2 K on a and 0 K on b", false},
	{"permutation no bond", `{"sites": [{"label": "a"}, {"label": "b"}, {"label": "c"}], "bonds": [{"a": "a", "b": "b", "exchange": 1}, {"a": "b", "b": "c", "exchange": 1}], "symmetries": [{"name": "cycle", "permutation": ["b", "c", "a"]}]}`, "symmetries[0]", "bond b-c (bonds[1]) maps onto c-a, which has no bond", false},
	{"permutation exchange", `{"sites": [{"label": "a"}, {"label": "b"}, {"label": "c"}], "bonds": [{"a": "a", "b": "b", "exchange": 1}, {"a": "b", "b": "c", "exchange": 1.5}], "symmetries": [{"name": "reflection", "permutation": ["c", "b", "a"]}]}`, "symmetries[0]", "is 1 K and that of its image", false},
	{"permutation DM", `{"sites": [{"label": "a"}, {"label": "b"}], "bonds": [{"a": "a", "b": "b", "exchange": 1, "dm": [0, 0, 0.5]}], "symmetries": [{"name": "swap", "permutation": ["b", "a"]}]}`, "symmetries[0]", "a DM vector changes sign when a permutation reverses its bond", false},
}

func TestBadClusters(t *testing.T) {
	if testing.Verbose() {
		for _, tc := range badClusters {
			_, err := Load(strings.NewReader(tc.json))
			t.Logf("%-26s %v", tc.name, err)
		}
	}
	for _, tc := range badClusters {
		t.Run(tc.name, func(t *testing.T) {
			m, err := Load(strings.NewReader(tc.json))
			if err == nil {
				t.Fatalf("Load accepted the cluster: %+v", m)
			}
			if m != nil {
				t.Errorf("Load returned a model with its error")
			}
			var list FieldErrors
			isList := errors.As(err, &list)
			if tc.file {
				if isList {
					t.Fatalf("error %q is a FieldErrors, want a file error", err)
				}
				if !strings.HasPrefix(err.Error(), "cluster file: ") || !strings.Contains(err.Error(), tc.reason) {
					t.Fatalf("error %q, want it to start with \"cluster file: \" and contain %q", err, tc.reason)
				}
				if strings.Contains(err.Error(), "proto:") {
					t.Errorf("error %q keeps protobuf's prefix", err)
				}
				return
			}
			if !isList {
				t.Fatalf("error %q (%T) is not a FieldErrors", err, err)
			}
			if len(list) == 0 {
				t.Fatal("empty FieldErrors")
			}
			path := tc.path
			if list[0].Path != path || !strings.Contains(list[0].Reason, tc.reason) {
				t.Fatalf("first error %q, want path %q and a reason containing %q (all: %v)", list[0], path, tc.reason, err)
			}
			if len(list) != 1 {
				t.Errorf("got %d errors, want 1: %v", len(list), err)
			}
			var first *FieldError
			if !errors.As(err, &first) || first != list[0] {
				t.Errorf("errors.As(*FieldError) does not find the first entry")
			}
			if !strings.HasPrefix(err.Error(), path+": ") {
				t.Errorf("Error() = %q, want it to start with %q", err, path+": ")
			}
		})
	}
}

func TestFieldErrorText(t *testing.T) {
	e := &FieldError{Path: "bonds[3].b", Reason: `unknown site "t9"`}
	if got, want := e.Error(), `bonds[3].b: unknown site "t9"`; got != want {
		t.Errorf("Error() = %q, want %q", got, want)
	}
	es := FieldErrors{e, {Path: "sites[2].spin", Reason: "0.7 is not a positive multiple of 1/2"}}
	if got, want := es.Error(), `bonds[3].b: unknown site "t9"; sites[2].spin: 0.7 is not a positive multiple of 1/2`; got != want {
		t.Errorf("Error() = %q, want %q", got, want)
	}
}

// Several problems are all reported, in the order of the file.
func TestAllErrorsReported(t *testing.T) {
	const file = `{
	  "sites": [
	    {"label": "a", "spin": 0.7},
	    {"label": "b", "gTensor": [1, 2, 3, 4]},
	    {"label": "a"}
	  ],
	  "bonds": [
	    {"a": "a", "b": "t9", "exchange": 1},
	    {"a": "b", "b": "b", "exchange": "NaN"},
	    {"a": "a", "b": "b"}
	  ],
	  "symmetries": [
	    {"name": "swap", "permutation": ["b", "a"]}
	  ]
	}`
	_, err := Load(strings.NewReader(file))
	var list FieldErrors
	if !errors.As(err, &list) {
		t.Fatalf("error %v is not a FieldErrors", err)
	}
	want := []string{
		"sites[0].spin: 0.7 is not a positive multiple of 1/2",
		"sites[1].gTensor: has 4 numbers, want 9",
		`sites[2].label: duplicate label "a" (first given as sites[0])`,
		`bonds[0].b: unknown site "t9"`,
		`bonds[1]: site "b" is bonded to itself`,
		"bonds[1].exchange: NaN is not a finite number",
		"bonds[2]: has no coupling",
		"symmetries[0].permutation: has 2 labels, want 3",
	}
	if len(list) != len(want) {
		t.Fatalf("got %d errors, want %d:\n%v", len(list), len(want), strings.ReplaceAll(err.Error(), "; ", "\n"))
	}
	for i, w := range want {
		if !strings.HasPrefix(list[i].Error(), w) {
			t.Errorf("error %d = %q, want it to start with %q", i, list[i], w)
		}
	}
}

// The example cluster file of FORMAT.md shows the syntax of every field but
// names sites it does not define; it must be refused for exactly that.
func TestFormatExample(t *testing.T) {
	_, err := LoadFile(filepath.Join("testdata", "format_example.json"))
	var list FieldErrors
	if !errors.As(err, &list) {
		t.Fatalf("error %v is not a FieldErrors", err)
	}
	if !strings.HasPrefix(err.Error(), filepath.Join("testdata", "format_example.json")+": ") {
		t.Errorf("LoadFile's error %q does not start with the path", err)
	}
	want := []string{
		`bonds[1].b: unknown site "t2"`,
		`bonds[2].a: unknown site "t2"`,
		`bonds[2].b: unknown site "t3"`,
		`symmetries[0].permutation: has 7 labels, want 3`,
	}
	if len(list) != len(want) {
		t.Fatalf("got %d errors, want %d: %v", len(list), len(want), err)
	}
	for i, w := range want {
		if !strings.HasPrefix(list[i].Error(), w) {
			t.Errorf("error %d = %q, want it to start with %q", i, list[i], w)
		}
	}
}

func TestLoadFileMissing(t *testing.T) {
	_, err := LoadFile(filepath.Join(t.TempDir(), "absent.json"))
	if !errors.Is(err, os.ErrNotExist) {
		t.Errorf("error %v, want one that is os.ErrNotExist", err)
	}
}

func TestLoadTooLarge(t *testing.T) {
	big := `{"name": "` + strings.Repeat("x", MaxFileSize) + `", "sites": [{"label": "a"}]}`
	_, err := Load(strings.NewReader(big))
	if err == nil || !strings.Contains(err.Error(), "cluster file: larger than the limit") {
		t.Errorf("error %v, want a refusal of the size", err)
	}
}

func TestLoadHeptamer(t *testing.T) {
	m, err := LoadFile(filepath.Join("testdata", "heptamer.json"))
	if err != nil {
		t.Fatal(err)
	}
	if len(m.Sites) != 7 || len(m.Bonds) != 12 || len(m.Symmetries) != 2 {
		t.Fatalf("got %d sites, %d bonds, %d symmetries, want 7, 12, 2", len(m.Sites), len(m.Bonds), len(m.Symmetries))
	}
	c := m.Sites[0]
	if c.Label != "c" || c.TwoS != 2 || c.G != IsotropicG(2.2) || c.SingleIon != 3.5 || c.Group != "impurity" {
		t.Errorf("centre site %+v", c)
	}
	if g := m.Sites[1].G; g != [9]float64{2.1, 0, 0, 0, 2.1, 0, 0, 0, 2.3} {
		t.Errorf("t1 g tensor %v", g)
	}
	b := m.Bonds[6]
	if b.A != 1 || b.B != 2 || b.J != 190 || b.Jz != 185 || b.DM != [3]float64{0, 0, 15} {
		t.Errorf("bond t1-t2 %+v", b)
	}
	if d, ok := m.Dimension(); !ok || d != 3*64 {
		t.Errorf("Dimension() = %d, %v, want 192", d, ok)
	}
	if got := m.Groups(); strings.Join(got, ",") != "bottom,impurity,top" {
		t.Errorf("Groups() = %v", got)
	}
}

func TestDefaults(t *testing.T) {
	c := &frustumv1.Cluster{
		Sites: []*frustumv1.Site{
			{Label: "a"},
			{Label: "b", G: proto.Float64(1.9)},
			{Label: "c", G: proto.Float64(1.9), GTensor: []float64{1, 2, 3, 4, 5, 6, 7, 8, 9}},
			{Label: "d", Spin: proto.Float64(1.5), SingleIon: proto.Float64(0)},
			{Label: "e", SingleIon: proto.Float64(0)},
		},
		Bonds: []*frustumv1.Bond{
			{A: "a", B: "b", Exchange: proto.Float64(3)},
			{A: "b", B: "c", ExchangeZ: proto.Float64(4)},
			{A: "c", B: "d", Dm: []float64{1, 2, 3}},
			{A: "d", B: "a", Tensor: []float64{1, 0, 0, 0, 0, 0, 0, 0, 0}},
			{A: "e", B: "a", Exchange: proto.Float64(0)},
		},
	}
	m, err := FromProto(c)
	if err != nil {
		t.Fatal(err)
	}
	wantSites := []struct {
		twoS int
		g    [9]float64
	}{
		{1, IsotropicG(2)},
		{1, IsotropicG(1.9)},
		{1, [9]float64{1, 2, 3, 4, 5, 6, 7, 8, 9}},
		{3, IsotropicG(2)},
		{1, IsotropicG(2)},
	}
	for i, w := range wantSites {
		if s := m.Sites[i]; s.TwoS != w.twoS || s.G != w.g || s.SingleIon != 0 || s.Position != nil {
			t.Errorf("site %d = %+v, want 2S = %d, g = %v", i, s, w.twoS, w.g)
		}
	}
	wantBonds := []Bond{
		{A: 0, B: 1, J: 3, Jz: 3},
		{A: 1, B: 2, J: 0, Jz: 4},
		{A: 2, B: 3, DM: [3]float64{1, 2, 3}},
		{A: 3, B: 0, Tensor: [9]float64{1}},
		{A: 4, B: 0},
	}
	for i, w := range wantBonds {
		if m.Bonds[i] != w {
			t.Errorf("bond %d = %+v, want %+v", i, m.Bonds[i], w)
		}
	}
	if m.Symmetries != nil {
		t.Errorf("symmetries %v, want none", m.Symmetries)
	}
}

// FromProto copies what it keeps: changing the message afterwards does not
// change the model.
func TestFromProtoCopies(t *testing.T) {
	c := &frustumv1.Cluster{Sites: []*frustumv1.Site{{Label: "a", Position: []float64{1, 2, 3}}}}
	m, err := FromProto(c)
	if err != nil {
		t.Fatal(err)
	}
	c.Sites[0].Position[0] = 99
	if m.Sites[0].Position[0] != 1 {
		t.Error("the model shares Position with the message")
	}
}

// Nil messages and nil elements are refused, not a panic.
func TestFromProtoNil(t *testing.T) {
	if _, err := FromProto(nil); err == nil {
		t.Error("FromProto(nil) accepted")
	}
	c := &frustumv1.Cluster{
		Sites:      []*frustumv1.Site{{Label: "a"}, nil},
		Bonds:      []*frustumv1.Bond{nil},
		Symmetries: []*frustumv1.Symmetry{nil},
	}
	_, err := FromProto(c)
	var list FieldErrors
	if !errors.As(err, &list) || list[0].Path != "sites[1].label" {
		t.Errorf("error %v, want sites[1].label first", err)
	}
}

// A file with very many problems lists the first MaxFieldErrors and counts
// the rest.
func TestManyErrors(t *testing.T) {
	var bonds []string
	for range MaxFieldErrors + 5 {
		bonds = append(bonds, `{"a": "a", "b": "zz", "exchange": 1}`)
	}
	_, err := Load(strings.NewReader(`{"sites": [{"label": "a"}], "bonds": [` + strings.Join(bonds, ",") + `]}`))
	var list FieldErrors
	if !errors.As(err, &list) || len(list) != MaxFieldErrors+1 {
		t.Fatalf("got %d errors, want %d", len(list), MaxFieldErrors+1)
	}
	last := list[MaxFieldErrors]
	if last.Path != "" || last.Reason != "and 5 more problems not listed" {
		t.Errorf("last entry %q", last)
	}
	if !strings.HasSuffix(err.Error(), "; and 5 more problems not listed") {
		t.Errorf("Error() ends %q", err.Error()[len(err.Error())-60:])
	}
}

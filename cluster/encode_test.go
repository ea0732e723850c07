package cluster

import (
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	frustumv1 "frustum/proto/frustum/v1"
)

// fullModel uses every field: anisotropic and isotropic g, single-ion terms,
// positions, XXZ, DM and tensor couplings, bonds in both orders and a
// checked symmetry. An invented cluster.
func fullModel() *Model {
	g := [9]float64{2.1, 0.01, 0, -0.01, 2.1, 0, 0, 0, 2.3}
	return &Model{
		Name: "invented test cluster",
		Sites: []Site{
			{Label: "p", TwoS: 2, G: g, Group: "outer", SingleIon: -2.5, Position: []float64{1, 0, 0}},
			{Label: "q", TwoS: 3, G: IsotropicG(1.95), Group: "middle"},
			{Label: "r", TwoS: 2, G: g, Group: "outer", SingleIon: -2.5, Position: []float64{-1, 0, 0}},
		},
		Bonds: []Bond{
			{A: 0, B: 1, J: 4, Jz: 3.5, DM: [3]float64{0.1, 0.2, 0.3}, Tensor: [9]float64{0, 0.5, 0, 0.25, 0, 0, 0, 0, 1}},
			{A: 2, B: 1, J: 4, Jz: 3.5, DM: [3]float64{0.1, 0.2, 0.3}, Tensor: [9]float64{0, 0.5, 0, 0.25, 0, 0, 0, 0, 1}},
			{A: 0, B: 2, J: -0.5, Jz: -0.5},
		},
		Symmetries: []Symmetry{{Name: "swap p r", Perm: []int{2, 1, 0}}},
	}
}

func TestRoundTrip(t *testing.T) {
	heptamer, err := LoadFile(filepath.Join("testdata", "heptamer.json"))
	if err != nil {
		t.Fatal(err)
	}
	models := append([]*Model{fullModel(), heptamer}, builtModels()...)
	for _, m := range models {
		if err := m.CheckPermutation(m.Symmetries[0].Perm); err != nil {
			t.Fatalf("%s: test model is wrong: %v", m.Name, err)
		}
		// Through the message.
		again, err := FromProto(m.ToProto())
		if err != nil {
			t.Errorf("%s: FromProto(ToProto): %v", m.Name, err)
			continue
		}
		if !again.Equal(m) {
			t.Errorf("%s: FromProto(ToProto) differs:\n got %+v\nwant %+v", m.Name, again, m)
		}
		// Through the file.
		data, err := protojson.Marshal(m.ToProto())
		if err != nil {
			t.Fatal(err)
		}
		fromFile, err := Load(strings.NewReader(string(data)))
		if err != nil {
			t.Errorf("%s: Load(Marshal(ToProto)): %v", m.Name, err)
		} else if !fromFile.Equal(m) {
			t.Errorf("%s: Load(Marshal(ToProto)) differs", m.Name)
		}
	}
}

func TestToProto(t *testing.T) {
	c := fullModel().ToProto()
	p, q := c.Sites[0], c.Sites[1]
	if p.GetSpin() != 1 || p.G != nil || len(p.GTensor) != 9 || p.GetSingleIon() != -2.5 || len(p.Position) != 3 {
		t.Errorf("site p: %v", p)
	}
	if q.GetSpin() != 1.5 || q.G == nil || q.GetG() != 1.95 || q.GTensor != nil || q.SingleIon != nil || q.Position != nil {
		t.Errorf("site q: %v", q)
	}
	b0, b2 := c.Bonds[0], c.Bonds[2]
	if b0.GetA() != "p" || b0.GetB() != "q" || b0.Exchange == nil || b0.GetExchangeZ() != 3.5 || len(b0.Dm) != 3 || len(b0.Tensor) != 9 {
		t.Errorf("bond 0: %v", b0)
	}
	if b2.GetExchange() != -0.5 || b2.ExchangeZ != nil || b2.Dm != nil || b2.Tensor != nil {
		t.Errorf("bond 2: %v", b2)
	}
	if s := c.Symmetries[0]; s.GetName() != "swap p r" || strings.Join(s.GetPermutation(), ",") != "r,q,p" {
		t.Errorf("symmetry: %v", s)
	}

	// The message shares no memory with the model.
	m := fullModel()
	mc := m.ToProto()
	mc.Sites[0].Position[0] = 42
	mc.Sites[0].GTensor[0] = 42
	if m.Sites[0].Position[0] != 1 {
		t.Error("ToProto shares Position")
	}

	// A hand-made model with an index that names no site gives a message
	// that FromProto refuses, not a panic.
	bad := fullModel()
	bad.Bonds[0].B = 9
	bad.Symmetries[0].Perm = []int{2, 1, -1}
	if _, err := FromProto(bad.ToProto()); err == nil {
		t.Error("bad indices survived the round trip")
	}
	var nilModel *Model
	if c := nilModel.ToProto(); c == nil || len(c.Sites) != 0 {
		t.Errorf("nil model: %v", c)
	}
}

func TestEqual(t *testing.T) {
	a, b := fullModel(), fullModel()
	if !a.Equal(b) {
		t.Fatal("equal models differ")
	}
	b.Sites[1].Position = []float64{}
	if !a.Equal(b) {
		t.Error("nil and empty Position differ")
	}
	for name, change := range map[string]func(m *Model){
		"name":     func(m *Model) { m.Name = "other" },
		"label":    func(m *Model) { m.Sites[0].Label = "x" },
		"spin":     func(m *Model) { m.Sites[0].TwoS = 4 },
		"g":        func(m *Model) { m.Sites[0].G[1] = 0 },
		"group":    func(m *Model) { m.Sites[0].Group = "" },
		"A":        func(m *Model) { m.Sites[0].SingleIon = 0 },
		"position": func(m *Model) { m.Sites[0].Position = nil },
		"J":        func(m *Model) { m.Bonds[2].J = 1 },
		"DM":       func(m *Model) { m.Bonds[0].DM[2] = 0 },
		"order":    func(m *Model) { m.Bonds[2].A, m.Bonds[2].B = 2, 0 },
		"bonds":    func(m *Model) { m.Bonds = m.Bonds[:2] },
		"symmetry": func(m *Model) { m.Symmetries = nil },
		"perm":     func(m *Model) { m.Symmetries[0].Perm = []int{0, 1, 2} },
	} {
		c := fullModel()
		change(c)
		if a.Equal(c) {
			t.Errorf("a change of %s is not seen", name)
		}
	}
	var n1, n2 *Model
	if !n1.Equal(n2) || n1.Equal(a) || a.Equal(n1) {
		t.Error("nil models")
	}
}

// Label order independence: listing the sites in another order, the bonds in
// another order and some bonds reversed (with the coupling transposed, so the
// same H) gives the same model up to the names of the indices, and the same
// symmetry verdicts.
func TestLabelOrderIndependence(t *testing.T) {
	base := DefectMultimer(MultimerParams{CentreSpin: 1, JPlanar: 190, JDefect: 20, GHost: 2.1, GCentre: 2.2, DMPlanar: 15})
	baseProto := base.ToProto()
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := range 20 {
		c := proto.Clone(baseProto).(*frustumv1.Cluster)
		// Sites in a random order; each permutation lists images in the new order.
		order := rng.Perm(len(c.Sites))
		sites := make([]*frustumv1.Site, len(order))
		for k, i := range order {
			sites[k] = c.Sites[i]
		}
		c.Sites = sites
		for _, s := range c.Symmetries {
			perm := make([]string, len(order))
			for k, i := range order {
				perm[k] = s.Permutation[i]
			}
			s.Permutation = perm
		}
		// Bonds shuffled, about half of them reversed.
		rng.Shuffle(len(c.Bonds), func(i, j int) { c.Bonds[i], c.Bonds[j] = c.Bonds[j], c.Bonds[i] })
		for _, b := range c.Bonds {
			if rng.IntN(2) == 0 {
				continue
			}
			b.A, b.B = b.B, b.A
			for i := range b.Dm {
				b.Dm[i] = -b.Dm[i]
			}
			if len(b.Tensor) == 9 {
				k := [9]float64(b.Tensor)
				k = transpose(k)
				b.Tensor = k[:]
			}
		}
		m, err := FromProto(c)
		if err != nil {
			t.Fatalf("trial %d: %v", trial, err)
		}
		if len(m.Symmetries) != len(base.Symmetries) {
			t.Errorf("trial %d: %d symmetries, want %d", trial, len(m.Symmetries), len(base.Symmetries))
		}
		// Same sites by label, same coupling for each ordered pair of labels.
		for _, s := range base.Sites {
			i, ok := m.Index(s.Label)
			if !ok {
				t.Fatalf("trial %d: site %s lost", trial, s.Label)
			}
			o := m.Sites[i]
			if o.TwoS != s.TwoS || o.G != s.G || o.Group != s.Group || o.SingleIon != s.SingleIon {
				t.Errorf("trial %d: site %s: %+v, want %+v", trial, s.Label, o, s)
			}
		}
		want := couplingsByLabel(base)
		got := couplingsByLabel(m)
		if len(got) != len(want) {
			t.Errorf("trial %d: %d couplings, want %d", trial, len(got), len(want))
		}
		for pair, k := range want {
			if got[pair] != k {
				t.Errorf("trial %d: coupling %s-%s: %v, want %v", trial, pair[0], pair[1], got[pair], k)
			}
		}
		// The vertical mirror still fails, for the DM reason.
		labels := map[string]string{"t2": "t3", "t3": "t2", "b2": "b3", "b3": "b2"}
		perm := make([]int, len(m.Sites))
		for i, s := range m.Sites {
			image := s.Label
			if l, ok := labels[image]; ok {
				image = l
			}
			perm[i], _ = m.Index(image)
		}
		if err := m.CheckPermutation(perm); err == nil || !strings.Contains(err.Error(), "DM vector changes sign") {
			t.Errorf("trial %d: mirror-v: %v", trial, err)
		}
	}
}

// couplingsByLabel maps each ordered pair of labels (lower label first) to
// the coupling matrix in that order.
func couplingsByLabel(m *Model) map[[2]string][9]float64 {
	out := map[[2]string][9]float64{}
	for _, b := range m.Bonds {
		a, c := m.Sites[b.A].Label, m.Sites[b.B].Label
		k := b.Coupling()
		if a > c {
			a, c = c, a
			k = transpose(k)
		}
		out[[2]string{a, c}] = k
	}
	return out
}

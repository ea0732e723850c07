package cluster

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"

	"google.golang.org/protobuf/encoding/protojson"

	frustumv1 "frustum/proto/frustum/v1"
)

// MaxTwoS is the largest 2S a site may have (S = 50). Larger spins are far
// beyond any cluster that exact diagonalization can hold, and are refused as
// a likely typing error.
const MaxTwoS = 100

// MaxDimensionLog2 bounds the Hilbert space: the product of 2S_i + 1 over the
// sites must not exceed 2^MaxDimensionLog2, so that every basis index fits in
// an int64. The engine's memory limits are far tighter; this bound only keeps
// a Model's Dimension meaningful.
const MaxDimensionLog2 = 62

// MaxFileSize is the largest cluster file Load reads, in bytes.
const MaxFileSize = 64 << 20

// Load reads a cluster file (the protojson form of frustumv1.Cluster) and
// validates it with FromProto. Unknown fields are refused. A file that is not
// a Cluster message at all gives an error starting "cluster file: "; a
// Cluster that is wrong gives a FieldErrors.
func Load(r io.Reader) (*Model, error) {
	data, err := io.ReadAll(io.LimitReader(r, MaxFileSize+1))
	if err != nil {
		return nil, &fileError{err}
	}
	if len(bytes.TrimSpace(data)) == 0 {
		return nil, &fileError{errors.New("empty: a cluster file is a JSON object with at least \"sites\"")}
	}
	if len(data) > MaxFileSize {
		return nil, &fileError{fmt.Errorf("larger than the limit of %d MiB", MaxFileSize>>20)}
	}
	var c frustumv1.Cluster
	if err := protojson.Unmarshal(data, &c); err != nil {
		return nil, &fileError{err}
	}
	return FromProto(&c)
}

// LoadFile reads and validates the cluster file at path, as Load does. Its
// errors start with the path; errors.As still finds a FieldErrors in them.
func LoadFile(path string) (*Model, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	m, err := Load(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return m, nil
}

// FromProto validates a Cluster message and returns its Model, with the
// defaults applied: spin 1/2, g 2.0 (gTensor overrides g), exchange 0 when a
// bond has only exchangeZ, dm or tensor, and exchangeZ equal to exchange when
// absent. Every user-asserted symmetry is checked with CheckPermutation.
//
// When c is refused, the error is a FieldErrors listing every problem found.
// Problems that can only be judged on a sound model (the symmetries) are
// checked only once the sites and bonds are sound. FromProto does not keep
// references to c.
func FromProto(c *frustumv1.Cluster) (*Model, error) {
	var v validator
	m := &Model{Name: c.GetName()}

	protoSites := c.GetSites()
	if len(protoSites) == 0 {
		v.add("sites", "the cluster has no sites: give at least one")
	}
	index := make(map[string]int, len(protoSites))
	spinsOK := true
	for i, ps := range protoSites {
		s, spinOK := v.site(fmt.Sprintf("sites[%d]", i), i, ps, index)
		spinsOK = spinsOK && spinOK
		m.Sites = append(m.Sites, s)
	}

	type pair struct{ lo, hi int }
	first := make(map[pair]int, len(c.GetBonds()))
	for i, pb := range c.GetBonds() {
		path := fmt.Sprintf("bonds[%d]", i)
		a, aOK := v.siteRef(path+".a", pb.GetA(), index)
		b, bOK := v.siteRef(path+".b", pb.GetB(), index)
		if aOK && bOK {
			if a == b {
				v.add(path, fmt.Sprintf("site %q is bonded to itself: a bond joins two different sites", pb.GetA()))
			} else {
				key := pair{min(a, b), max(a, b)}
				if j, dup := first[key]; dup {
					v.add(path, fmt.Sprintf("repeated bond %s-%s (first given as bonds[%d]): a-b and b-a are the same bond, so give all its couplings on one",
						pb.GetA(), pb.GetB(), j))
				} else {
					first[key] = i
				}
			}
		}
		m.Bonds = append(m.Bonds, v.bond(path, a, b, pb))
	}

	structureOK := len(v.errs) == 0
	if spinsOK && len(m.Sites) > 0 {
		if _, ok := m.Dimension(); !ok {
			log2 := 0.0
			for _, s := range m.Sites {
				log2 += math.Log2(float64(s.LocalDimension()))
			}
			v.add("sites", fmt.Sprintf("%d sites give a Hilbert space of dimension 2^%.1f, more than the limit of 2^%d (basis indices must fit in an int64); one complex state vector alone would need 2^%.1f bytes",
				len(m.Sites), log2, MaxDimensionLog2, log2+4))
		}
	}

	for i, ps := range c.GetSymmetries() {
		path := fmt.Sprintf("symmetries[%d]", i)
		perm, ok := v.permutation(path+".permutation", ps.GetPermutation(), m, index)
		if !ok || !structureOK {
			continue
		}
		if err := m.CheckPermutation(perm); err != nil {
			name := "the permutation"
			if ps.GetName() != "" {
				name = strconv.Quote(ps.GetName())
			}
			v.add(path, fmt.Sprintf("%s does not commute with H: %v", name, err))
			continue
		}
		m.Symmetries = append(m.Symmetries, Symmetry{Name: ps.GetName(), Perm: perm})
	}

	if len(v.errs) > 0 {
		return nil, v.errs
	}
	return m, nil
}

// MaxFieldErrors is the number of problems a FieldErrors lists in full; past
// it, one last entry with an empty Path counts the rest.
const MaxFieldErrors = 100

// validator collects the problems of one cluster.
type validator struct {
	errs FieldErrors
	more int // problems past MaxFieldErrors
}

func (v *validator) add(path, reason string) {
	if len(v.errs) < MaxFieldErrors {
		v.errs = append(v.errs, &FieldError{Path: path, Reason: reason})
		return
	}
	v.more++
	if v.more == 1 {
		v.errs = append(v.errs, &FieldError{})
	}
	v.errs[MaxFieldErrors].Reason = fmt.Sprintf("and %s not listed", count(v.more, "more problem"))
}

// finite reports whether x is a finite number, and records the problem when
// it is not.
func (v *validator) finite(path string, x float64) bool {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		v.add(path, formatFloat(x)+" is not a finite number")
		return false
	}
	return true
}

// finiteList checks every element of xs, naming each as path[k].
func (v *validator) finiteList(path string, xs []float64) bool {
	ok := true
	for k, x := range xs {
		if !v.finite(fmt.Sprintf("%s[%d]", path, k), x) {
			ok = false
		}
	}
	return ok
}

// site validates sites[i] and records its label in index. spinOK is false
// when the spin could not be read, so that checks that need it are skipped.
func (v *validator) site(path string, i int, ps *frustumv1.Site, index map[string]int) (s Site, spinOK bool) {
	if ps == nil {
		ps = &frustumv1.Site{}
	}
	s = Site{Label: ps.GetLabel(), TwoS: 1, G: IsotropicG(2), Group: ps.GetGroup()}
	switch j, dup := index[s.Label]; {
	case s.Label == "":
		v.add(path+".label", "is missing: every site needs a non-empty label")
	case dup:
		v.add(path+".label", fmt.Sprintf("duplicate label %q (first given as sites[%d])", s.Label, j))
	default:
		index[s.Label] = i
	}

	spinOK = true
	if ps.Spin != nil {
		x := *ps.Spin
		switch {
		case !v.finite(path+".spin", x):
			spinOK = false
		case x <= 0 || 2*x != math.Trunc(2*x):
			v.add(path+".spin", formatFloat(x)+" is not a positive multiple of 1/2")
			spinOK = false
		case 2*x > MaxTwoS:
			v.add(path+".spin", fmt.Sprintf("%s is too large: 2S = %s, and the limit is 2S <= %d", formatFloat(x), formatFloat(2*x), MaxTwoS))
			spinOK = false
		default:
			s.TwoS = int(2 * x)
		}
	}

	if ps.G != nil && v.finite(path+".g", *ps.G) {
		s.G = IsotropicG(*ps.G)
	}
	if gt := ps.GetGTensor(); len(gt) > 0 {
		if len(gt) != 9 {
			v.add(path+".gTensor", fmt.Sprintf("has %s, want 9 (a 3x3 tensor, row-major)", count(len(gt), "number")))
		} else if v.finiteList(path+".gTensor", gt) {
			copy(s.G[:], gt)
		}
	}

	if pos := ps.GetPosition(); len(pos) > 0 {
		if len(pos) != 3 {
			v.add(path+".position", fmt.Sprintf("has %s, want 3 (x, y, z) or none", count(len(pos), "number")))
		} else if v.finiteList(path+".position", pos) {
			s.Position = append([]float64(nil), pos...)
		}
	}

	if ps.SingleIon != nil && v.finite(path+".singleIon", *ps.SingleIon) {
		a := *ps.SingleIon
		if spinOK && s.TwoS == 1 && a != 0 {
			v.add(path+".singleIon", "is given on a spin-1/2 site, where A (S^z)^2 = A/4 is a constant that only shifts every level: remove it, or give the site spin >= 1")
		} else {
			s.SingleIon = a
		}
	}
	return s, spinOK
}

// siteRef resolves the label of one end of a bond.
func (v *validator) siteRef(path, label string, index map[string]int) (int, bool) {
	if label == "" {
		v.add(path, "is missing: a bond names two sites, a and b")
		return -1, false
	}
	i, ok := index[label]
	if !ok {
		v.add(path, fmt.Sprintf("unknown site %q", label))
		return -1, false
	}
	return i, true
}

// bond validates the couplings of one bond and applies their defaults.
func (v *validator) bond(path string, a, b int, pb *frustumv1.Bond) Bond {
	if pb == nil {
		pb = &frustumv1.Bond{}
	}
	bond := Bond{A: a, B: b}
	if pb.Exchange != nil && v.finite(path+".exchange", *pb.Exchange) {
		bond.J = *pb.Exchange
	}
	bond.Jz = bond.J
	if pb.ExchangeZ != nil && v.finite(path+".exchangeZ", *pb.ExchangeZ) {
		bond.Jz = *pb.ExchangeZ
	}
	if dm := pb.GetDm(); len(dm) > 0 {
		if len(dm) != 3 {
			v.add(path+".dm", fmt.Sprintf("has %s, want 3 (Dx, Dy, Dz)", count(len(dm), "number")))
		} else if v.finiteList(path+".dm", dm) {
			copy(bond.DM[:], dm)
		}
	}
	if t := pb.GetTensor(); len(t) > 0 {
		if len(t) != 9 {
			v.add(path+".tensor", fmt.Sprintf("has %s, want 9 (a 3x3 tensor, row-major)", count(len(t), "number")))
		} else if v.finiteList(path+".tensor", t) {
			copy(bond.Tensor[:], t)
		}
	}
	if pb.Exchange == nil && pb.ExchangeZ == nil && len(pb.GetDm()) == 0 && len(pb.GetTensor()) == 0 {
		v.add(path, "has no coupling: give at least one of exchange, exchangeZ, dm, tensor")
	}
	return bond
}

// permutation resolves the labels of a symmetry to site indices and checks
// that they form a permutation of the sites.
func (v *validator) permutation(path string, labels []string, m *Model, index map[string]int) ([]int, bool) {
	n := len(m.Sites)
	if len(labels) != n {
		v.add(path, fmt.Sprintf("has %s, want %d: the image of each site, in the order of sites", count(len(labels), "label"), n))
		return nil, false
	}
	perm := make([]int, n)
	source := make(map[int]int, n) // image -> position in labels
	ok := true
	for k, l := range labels {
		p := fmt.Sprintf("%s[%d]", path, k)
		j, found := index[l]
		if !found {
			v.add(p, fmt.Sprintf("unknown site %q", l))
			ok = false
			continue
		}
		if prev, dup := source[j]; dup {
			v.add(p, fmt.Sprintf("site %q is already the image of %q (permutation[%d]): a permutation maps different sites to different sites",
				l, m.Sites[prev].Label, prev))
			ok = false
			continue
		}
		source[j] = k
		perm[k] = j
	}
	return perm, ok
}

// count writes "1 label", "2 labels".
func count(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return fmt.Sprintf("%d %ss", n, noun)
}

func formatFloat(x float64) string {
	return strconv.FormatFloat(x, 'g', -1, 64)
}

// errNoModel is returned by methods called on a nil Model.
var errNoModel = errors.New("no model")

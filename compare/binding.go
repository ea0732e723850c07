package compare

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"google.golang.org/protobuf/proto"

	"frustum/ed"

	frustumv1 "frustum/proto/frustum/v1"
)

// Parameter is one named fit parameter bound to one or more field paths of a
// cluster, written as the cluster's error messages write them:
//
//	sites[0].g  sites[2].gTensor[8]  sites[1].singleIon
//	bonds[6].exchange  bonds[6].exchangeZ  bonds[2].dm[2]  bonds[0].tensor[4]
//
// All its paths share one value ("all planar bonds share one J"). Setting a
// bond's exchange on a bond without exchangeZ changes both J and Jz, as the
// cluster file says (Jz = J unless given).
type Parameter struct {
	Name  string
	Paths []string
	// Min and Max bound the value when HasMin, HasMax.
	Min, Max       float64
	HasMin, HasMax bool
	// Start is the starting value when HasStart; otherwise the cluster's
	// value at the first path.
	Start    float64
	HasStart bool
}

// path is a parsed field path: sites[i].field[k] or bonds[i].field[k].
type path struct {
	text      string
	bond      bool
	index     int
	field     string
	component int // -1 for a scalar field
}

// scalarFields and vectorFields are the numeric fields a parameter may set,
// with the length of the vector ones.
var (
	siteFields = map[string]int{"g": -1, "singleIon": -1, "gTensor": 9}
	bondFields = map[string]int{"exchange": -1, "exchangeZ": -1, "dm": 3, "tensor": 9}
)

// parsePath reads one path; the error says what is accepted.
func parsePath(s string) (path, error) {
	p := path{text: s, component: -1}
	head, rest, ok := strings.Cut(s, ".")
	if !ok {
		return p, fmt.Errorf("path %q: want sites[i].FIELD or bonds[i].FIELD", s)
	}
	list, idx, err := indexed(head)
	if err != nil || idx < 0 {
		return p, fmt.Errorf("path %q: want sites[i].FIELD or bonds[i].FIELD with i >= 0", s)
	}
	var fields map[string]int
	switch list {
	case "sites":
		fields = siteFields
	case "bonds":
		fields, p.bond = bondFields, true
	default:
		return p, fmt.Errorf("path %q: only sites[i] and bonds[i] hold fit parameters", s)
	}
	p.index = idx
	name, comp, err := indexed(rest)
	if err != nil {
		return p, fmt.Errorf("path %q: %v", s, err)
	}
	n, known := fields[name]
	if !known {
		return p, fmt.Errorf("path %q: %s has no numeric field %q that can be fitted (%s)", s, list, name, fieldList(fields))
	}
	switch {
	case n < 0 && comp >= 0:
		return p, fmt.Errorf("path %q: %s is a number, not a list", s, name)
	case n > 0 && comp < 0:
		return p, fmt.Errorf("path %q: %s has %d components; name one, as in %s[0]", s, name, n, name)
	case n > 0 && comp >= n:
		return p, fmt.Errorf("path %q: %s has components 0 to %d", s, name, n-1)
	}
	p.field, p.component = name, comp
	return p, nil
}

func fieldList(f map[string]int) string {
	var names []string
	for _, n := range []string{"g", "gTensor", "singleIon", "exchange", "exchangeZ", "dm", "tensor"} {
		if _, ok := f[n]; ok {
			names = append(names, n)
		}
	}
	return strings.Join(names, ", ")
}

// indexed splits "name[3]" into ("name", 3); a plain name gives index -1.
func indexed(s string) (string, int, error) {
	open := strings.IndexByte(s, '[')
	if open < 0 {
		return s, -1, nil
	}
	if !strings.HasSuffix(s, "]") {
		return s, -1, fmt.Errorf("%q: unclosed [", s)
	}
	k, err := strconv.Atoi(s[open+1 : len(s)-1])
	if err != nil || k < 0 {
		return s, -1, fmt.Errorf("%q: the index must be a whole number >= 0", s)
	}
	return s[:open], k, nil
}

// applies reports whether the path exists in c (the index is in range), and
// why not.
func (p path) applies(c *frustumv1.Cluster) (bool, string) {
	if p.bond {
		if p.index >= len(c.GetBonds()) {
			return false, fmt.Sprintf("it has %d bonds", len(c.GetBonds()))
		}
		return true, ""
	}
	if p.index >= len(c.GetSites()) {
		return false, fmt.Sprintf("it has %d sites", len(c.GetSites()))
	}
	if p.field == "g" && len(c.GetSites()[p.index].GetGTensor()) > 0 {
		return false, "that site has a gTensor, which overrides g; vary its gTensor components instead"
	}
	return true, ""
}

// get returns the value at p in c, with the file's defaults.
func (p path) get(c *frustumv1.Cluster) float64 {
	if p.bond {
		b := c.GetBonds()[p.index]
		switch p.field {
		case "exchange":
			return b.GetExchange()
		case "exchangeZ":
			if b.ExchangeZ == nil {
				return b.GetExchange()
			}
			return b.GetExchangeZ()
		case "dm":
			return component(b.GetDm(), p.component)
		case "tensor":
			return component(b.GetTensor(), p.component)
		}
	}
	s := c.GetSites()[p.index]
	switch p.field {
	case "g":
		if s.G == nil {
			return 2
		}
		return s.GetG()
	case "singleIon":
		return s.GetSingleIon()
	case "gTensor":
		return component(s.GetGTensor(), p.component)
	}
	return math.NaN()
}

func component(v []float64, k int) float64 {
	if k < len(v) {
		return v[k]
	}
	return 0
}

// set writes v at p in c (which must be a private copy).
func (p path) set(c *frustumv1.Cluster, v float64) {
	if p.bond {
		b := c.Bonds[p.index]
		switch p.field {
		case "exchange":
			b.Exchange = proto.Float64(v)
		case "exchangeZ":
			b.ExchangeZ = proto.Float64(v)
		case "dm":
			b.Dm = setComponent(b.Dm, 3, p.component, v)
		case "tensor":
			b.Tensor = setComponent(b.Tensor, 9, p.component, v)
		}
		return
	}
	s := c.Sites[p.index]
	switch p.field {
	case "g":
		s.G = proto.Float64(v)
	case "singleIon":
		s.SingleIon = proto.Float64(v)
	case "gTensor":
		s.GTensor = setComponent(s.GTensor, 9, p.component, v)
	}
}

func setComponent(x []float64, n, k int, v float64) []float64 {
	if len(x) < n {
		x = append(x, make([]float64, n-len(x))...)
	}
	x[k] = v
	return x
}

// unit returns the unit of the value at p.
func (p path) unit() string {
	switch p.field {
	case "g", "gTensor":
		return "1"
	}
	return "K"
}

// binding is the parameters that apply to one model, with their paths.
type binding struct {
	params []Parameter // the parameters that apply, in the request's order
	paths  [][]path
	start  []float64
	warn   []string
}

// bind resolves the request's parameters for cluster c. A parameter none of
// whose paths exist in c is left out with a warning; one with only some of
// them is an error (the tie would be broken silently otherwise).
func bind(c *frustumv1.Cluster, vary []Parameter, parsed [][]path) (*binding, error) {
	b := &binding{}
	for i, par := range vary {
		var ok []path
		var why []string
		for _, p := range parsed[i] {
			if yes, reason := p.applies(c); yes {
				ok = append(ok, p)
			} else {
				why = append(why, p.text+": "+reason)
			}
		}
		switch {
		case len(ok) == 0:
			b.warn = append(b.warn, fmt.Sprintf("parameter %s does not apply to this model (%s); fitted without it", par.Name, strings.Join(why, "; ")))
			continue
		case len(why) > 0:
			return nil, &ed.RequestError{Field: fmt.Sprintf("vary[%d].paths", i), Reason: fmt.Sprintf("parameter %s: %s", par.Name, strings.Join(why, "; "))}
		}
		units := map[string]bool{}
		for _, p := range ok {
			units[p.unit()] = true
		}
		if len(units) > 1 {
			return nil, &ed.RequestError{Field: fmt.Sprintf("vary[%d].paths", i), Reason: fmt.Sprintf("parameter %s ties a g factor to an energy", par.Name)}
		}
		start := ok[0].get(c)
		if par.HasStart {
			start = par.Start
		}
		if (par.HasMin && start < par.Min) || (par.HasMax && start > par.Max) {
			lo, hi := par.Min, par.Max
			switch {
			case par.HasMin && par.HasMax:
				start = (lo + hi) / 2
			case par.HasMin:
				start = lo + math.Max(1, math.Abs(lo))*0.1
			default:
				start = hi - math.Max(1, math.Abs(hi))*0.1
			}
			b.warn = append(b.warn, fmt.Sprintf("parameter %s: the model's value %g lies outside its bounds; started at %g", par.Name, ok[0].get(c), start))
		}
		b.params = append(b.params, par)
		b.paths = append(b.paths, ok)
		b.start = append(b.start, start)
	}
	return b, nil
}

// apply returns a copy of c with the parameter values put in.
func (b *binding) apply(c *frustumv1.Cluster, values []float64) *frustumv1.Cluster {
	out := proto.Clone(c).(*frustumv1.Cluster)
	for i, ps := range b.paths {
		for _, p := range ps {
			p.set(out, values[i])
		}
	}
	return out
}

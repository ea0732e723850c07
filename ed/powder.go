package ed

import (
	"context"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"frustum/cluster"
	"frustum/sphere"
)

// Powder averages. With req.Powder = N > 0, Magnetization averages M, the
// group moments, chi, Saturation and GroupSaturation over the directions n_k
// of the smallest quadrature rule on the sphere with at least N points
// (sphere.ForCount), with the rule's weights w_k:
//
//	M_powder(B, T) = sum_k w_k M(B n_k, T),   sum_k w_k = 1,
//
// the mean over the sphere of directions of the moment along the field. The
// same average on the next coarser rule (sphere.Coarser) is the convergence
// estimate: PowderReport.Deviation is the largest difference between the two.
//
// Directions whose curves are equal by symmetry are evaluated once:
//
//   - time reversal, always: H0 is even under time reversal and the Zeeman
//     term odd, so H(-B n) is the time-reversed H(B n) and M(-n) = M(n), for
//     the group moments as well;
//   - spin rotations: a unitary W that turns every spin by the proper
//     rotation R and moves site i to P(i) (P the identity or a product of
//     the cluster's checked symmetries) has W^dagger S_i W = R S_P(i); with
//     Q = R^T,
//
//     K_P(a)P(b) = Q K_ab Q^T for every bond (a reversed bond enters with
//     K transposed, a pair without a bond with K = 0),
//     A_P(i) e_z e_z^T = Q (A_i e_z e_z^T) Q^T for the single-ion terms,
//     g_P(i) = Q g_i Q^T for every g tensor,
//
//     give W^dagger H(B n) W = H(B Q n) and W^dagger M_n W = M_Qn, so that
//     M(Q n) = M(n); the moment of group G at n is that of group P(G) at Q n.
//     The rotations tried are the 24 of the cube, those by 2 pi/3 and 2 pi/6
//     about z, and for a Gauss product rule the rotation by its azimuthal
//     step about z; one is used when it maps the rule's points onto
//     themselves and some P, searched for among all site permutations
//     (permutationSearch), satisfies the conditions and maps every group
//     onto a group. (A P from the cluster's checked symmetries alone would
//     add nothing: such a P leaves every K and g as it is, so Q would
//     satisfy the conditions with the identity too. The permutations that
//     matter go with local axes that turn from site to site, which the
//     cluster file cannot declare as symmetries.)
//   - full isotropy: with an SU(2)-invariant H0 and every g tensor a
//     multiple of the identity (the multiples may differ), a rotation of all
//     spins turns H(B n) into H(B n') for any two directions, so every
//     direction gives the same curves and one is evaluated.

// pointSource says where the values at one point of a rule come from: the
// evaluated direction eval, and for group g the group groups[g] there (nil:
// the same group).
type pointSource struct {
	eval   int
	groups []int
}

// powderPlan is what a powder average will do.
type powderPlan struct {
	rule, coarse sphere.Rule
	hasCoarse    bool
	// dirs are the distinct directions evaluated: the first fineEvals serve
	// the rule, the rest only the coarse rule. Each is planned again when it
	// runs, with inner (plans are deterministic; keeping them all would cost
	// memory on large rules).
	dirs      [][3]float64
	inner     Options
	fineEvals int
	// fine[k] and coarseSrc[k] give the values at point k of each rule.
	fine, coarseSrc []pointSource
	model           *cluster.Model
	isotropic       bool
	groups          []string
	symmetry        string
	// outer directions are evaluated at once.
	outer int
	rep   Report
}

// planPowder chooses the rule, reduces its directions by symmetry (unless
// reduce is false) and plans every direction within the memory limit.
func planPowder(m *cluster.Model, req MagnetizationRequest, opt Options, reduce bool) (*powderPlan, error) {
	rule, err := sphere.ForCount(req.Powder)
	if err != nil {
		return nil, &RequestError{Field: "powder", Reason: err.Error()}
	}
	pp := &powderPlan{rule: rule, model: m, groups: m.Groups()}
	pp.coarse, pp.hasCoarse = sphere.Coarser(rule)

	pp.isotropic = reduce && isotropicModel(m)
	var rot []spinRotation
	switch {
	case pp.isotropic:
		pp.symmetry = "isotropic (SU(2)-invariant exchange, every g a multiple of the identity): one direction serves all"
		pp.dirs = [][3]float64{{0, 0, 1}}
		pp.fine = make([]pointSource, len(rule.Points))
		if pp.hasCoarse {
			pp.coarseSrc = make([]pointSource, len(pp.coarse.Points))
		}
		pp.fineEvals = 1
	default:
		if reduce {
			orders := []int{azimuthalOrder(rule)}
			if pp.hasCoarse {
				orders = append(orders, azimuthalOrder(pp.coarse))
			}
			rot = modelRotations(m, pp.groups, orders)
		}
		fineIdx := newPointIndex(rule.Points)
		var used []spinRotation
		pp.fine, used = assignDirections(rule, fineIdx, rot, pp, nil, nil)
		pp.fineEvals = len(pp.dirs)
		if pp.hasCoarse {
			pp.coarseSrc, _ = assignDirections(pp.coarse, newPointIndex(pp.coarse.Points), rot, pp, fineIdx, pp.fine)
		}
		pp.symmetry = describeSymmetry(reduce, used)
	}

	// Plan every direction with the task's options: the largest one-block
	// estimate decides how many directions fit in memory at once.
	single := req
	single.Powder, single.Direction = 0, [3]float64{}
	var need int64
	for _, n := range pp.dirs {
		p, err := planDirection(m, single, n, opt)
		if err != nil {
			return nil, err
		}
		need = max(need, p.rep.MemoryBytes)
	}
	limit := opt.Limits.MaxMemory
	if limit <= 0 {
		limit = DefaultMaxMemory
	}
	total := workerCount(opt, math.MaxInt32)
	pp.outer = 1
	for k := 2; k <= min(total, len(pp.dirs)); k++ {
		if int64(k)*need > limit {
			break
		}
		pp.outer = k
	}
	pp.inner = Options{Limits: opt.Limits, Workers: opt.Workers}
	if pp.outer > 1 {
		// Each of the outer directions gets its share of the workers and of
		// the memory.
		pp.inner = Options{Limits: Limits{MaxMemory: limit / int64(pp.outer)}, Workers: max(1, total/pp.outer)}
	}
	// The report is that of the largest direction, and says which routes
	// the directions take.
	routes := map[string]bool{}
	var big *taskPlan
	for _, n := range pp.dirs {
		p, err := planDirection(m, single, n, pp.inner)
		if err != nil {
			return nil, err
		}
		routes[p.rep.Route] = true
		if big == nil || p.rep.MemoryBytes > big.rep.MemoryBytes {
			big = p
		}
	}
	pp.rep = big.rep
	pp.rep.Warnings = nil
	per := "per direction: "
	if len(routes) > 1 {
		per = fmt.Sprintf("per direction (%d different routes; the largest): ", len(routes))
	}
	coarse := "no coarser rule, so no convergence estimate"
	if pp.hasCoarse {
		coarse = fmt.Sprintf("%d more for the convergence estimate against %s", len(pp.dirs)-pp.fineEvals, pp.coarse.Name)
	}
	at := ""
	if pp.outer > 1 {
		at = fmt.Sprintf("; %d directions at a time", pp.outer)
	}
	pp.rep.Route = fmt.Sprintf("powder average over %d field directions (%s, exact to degree %d): %d evaluated after the symmetry reduction, %s%s; %s%s",
		len(rule.Points), rule.Name, rule.Degree, pp.fineEvals, coarse, at, per, big.rep.Route)
	if !pp.hasCoarse {
		pp.rep.Warnings = append(pp.rep.Warnings, fmt.Sprintf("the powder average over the %d-point %s has no convergence estimate (there is no coarser rule): ask for more directions", len(rule.Points), rule.Name))
	}
	return pp, nil
}

// runPowder evaluates the planned directions and averages them.
func runPowder(ctx context.Context, pp *powderPlan, req MagnetizationRequest, opt Options) (*MagnetizationResult, error) {
	single := req
	single.Powder, single.Direction = 0, [3]float64{}
	results := make([]*MagnetizationResult, len(pp.dirs))
	inner := pp.inner
	if pp.outer == 1 {
		inner.Progress = opt.Progress // one direction at a time: its stages too
	}
	err := parallel(ctx, len(pp.dirs), nil, Options{Workers: pp.outer, Progress: opt.Progress}, "powder directions", func(i int) error {
		p, err := planDirection(pp.model, single, pp.dirs[i], pp.inner)
		if err != nil {
			return err
		}
		r, err := runDirection(ctx, p, single, inner)
		results[i] = r
		return err
	})
	if err != nil {
		return nil, err
	}
	res := &MagnetizationResult{Field: append([]float64(nil), req.Fields...)}
	if pp.isotropic {
		// Every direction has these curves: the average is them, exactly.
		res.Curves, res.Saturation, res.GroupSaturation = results[0].Curves, results[0].Saturation, results[0].GroupSaturation
	} else {
		res.Curves = averageCurves(pp.rule, pp.fine, results, pp.groups, req)
		res.Saturation, res.GroupSaturation = averageSaturation(pp.model, pp.rule, pp.groups)
	}
	rep := &PowderReport{Rule: pp.rule.Name, Directions: len(pp.rule.Points), Degree: pp.rule.Degree,
		Evaluated: len(pp.dirs), Symmetry: pp.symmetry, CoarseRule: "none"}
	res.Report = pp.rep
	res.Report.Warnings = append([]string(nil), pp.rep.Warnings...)
	if pp.hasCoarse {
		rep.CoarseRule, rep.CoarseDirections = pp.coarse.Name, len(pp.coarse.Points)
		coarse := res.Curves
		if !pp.isotropic {
			coarse = averageCurves(pp.coarse, pp.coarseSrc, results, pp.groups, req)
		}
		for ci, c := range res.Curves {
			for bi, x := range c.Magnetization {
				rep.Deviation = math.Max(rep.Deviation, math.Abs(x-coarse[ci].Magnetization[bi]))
			}
		}
		if res.Saturation > 0 {
			rep.RelativeDeviation = rep.Deviation / res.Saturation
		}
		if rep.RelativeDeviation > 1e-3 {
			res.Report.Warnings = append(res.Report.Warnings, fmt.Sprintf(
				"the powder average may be unconverged: it differs from the %s average by up to %.2g of saturation (%.3g mu_B); ask for more directions than %d",
				pp.coarse.Name, rep.RelativeDeviation, rep.Deviation, len(pp.rule.Points)))
		}
	}
	res.Powder = rep
	seen := map[string]bool{}
	for _, w := range res.Report.Warnings {
		seen[w] = true
	}
	for _, r := range results {
		res.Report.Diagonalizations += r.Report.Diagonalizations
		res.Report.addVectors(vectorTally{computed: r.Report.Eigenvectors, total: r.Report.Eigenvectors + r.Report.EigenvectorsSkipped, share: r.Report.NeglectedWeight})
		for _, w := range r.Report.Warnings {
			if !seen[w] {
				seen[w] = true
				res.Report.Warnings = append(res.Report.Warnings, w)
			}
		}
	}
	return res, nil
}

// averageCurves returns sum_k w_k of the curves at the rule's points, each
// taken from its source direction (group moments relabelled).
func averageCurves(rule sphere.Rule, src []pointSource, results []*MagnetizationResult, groups []string, req MagnetizationRequest) []Curve {
	nb := len(req.Fields)
	out := make([]Curve, len(req.Temperatures))
	for ti, T := range req.Temperatures {
		c := Curve{Temperature: T, Magnetization: make([]float64, nb)}
		if len(groups) > 0 {
			c.Groups = map[string][]float64{}
			for _, g := range groups {
				c.Groups[g] = make([]float64, nb)
			}
		}
		if req.Susceptibility {
			c.Susceptibility = make([]float64, nb)
		}
		for k, w := range rule.Weights {
			s := src[k]
			from := results[s.eval].Curves[ti]
			for bi := range c.Magnetization {
				c.Magnetization[bi] += w * from.Magnetization[bi]
			}
			for gi, g := range groups {
				og := g
				if s.groups != nil {
					og = groups[s.groups[gi]]
				}
				dst, v := c.Groups[g], from.Groups[og]
				for bi := range dst {
					dst[bi] += w * v[bi]
				}
			}
			if c.Susceptibility != nil {
				for bi := range c.Susceptibility {
					c.Susceptibility[bi] += w * from.Susceptibility[bi]
				}
			}
			// Statistical errors (FTLM): the directions share their random
			// vectors, so their errors may be correlated; sum_k |w_k|
			// sigma_k bounds the standard deviation of the weighted sum
			// whatever the correlation (Minkowski's inequality).
			addError(&c.MagnetizationError, from.MagnetizationError, w, nb)
			if req.Susceptibility {
				addError(&c.SusceptibilityError, from.SusceptibilityError, w, nb)
			}
		}
		out[ti] = c
	}
	return out
}

// addError adds |w| src to *dst (allocated with n entries on first use);
// nothing when src is nil.
func addError(dst *[]float64, src []float64, w float64, n int) {
	if src == nil {
		return
	}
	if *dst == nil {
		*dst = make([]float64, n)
	}
	for i := range *dst {
		(*dst)[i] += math.Abs(w) * src[i]
	}
}

// averageSaturation returns the rule's average of sum_i |g_i^T n| S_i, in
// total and per group (nil without groups).
func averageSaturation(m *cluster.Model, rule sphere.Rule, groups []string) (float64, map[string]float64) {
	var total float64
	per := make([]float64, len(groups))
	for k, n := range rule.Points {
		t, g := saturations(m, groups, siteFields(m, n))
		total += rule.Weights[k] * t
		for i, x := range g {
			per[i] += rule.Weights[k] * x
		}
	}
	if len(groups) == 0 {
		return total, nil
	}
	out := map[string]float64{}
	for i, name := range groups {
		out[name] = per[i]
	}
	return total, out
}

// isotropicModel reports whether H0 is SU(2) invariant and every g tensor is
// a multiple of the identity.
func isotropicModel(m *cluster.Model) bool {
	for _, s := range m.Sites {
		if s.SingleIon != 0 || !isIdentityMultiple(s.G) {
			return false
		}
	}
	for _, b := range m.Bonds {
		if !isIdentityMultiple(b.Coupling()) {
			return false
		}
	}
	return true
}

// spinRotation is a map n -> q n of the field directions under which the
// curves are invariant: a proper rotation with a site permutation, or time
// reversal (q = -1). groups[g] is the group at q n whose moment equals that
// of group g at n (nil: the same).
type spinRotation struct {
	q        [9]float64
	name     string
	permuted bool
	groups   []int
}

// modelRotations returns time reversal and every candidate rotation (see
// candidateRotations) that leaves the Hamiltonian invariant together with
// some site permutation that moves every group wholly onto a group (see the
// comment at the top of the file; the permutation is searched for, see
// permutationSearch).
func modelRotations(m *cluster.Model, groups []string, orders []int) []spinRotation {
	out := []spinRotation{{q: [9]float64{-1, 0, 0, 0, -1, 0, 0, 0, -1}, name: "time reversal"}}
	search := newPermutationSearch(m, groups)
	for _, q := range candidateRotations(orders) {
		if p, ok := search.find(q); ok {
			gm, _ := groupImage(m, groups, p)
			permuted := false
			for i, x := range p {
				permuted = permuted || x != i
			}
			out = append(out, spinRotation{q: q, name: rotationName(q), permuted: permuted, groups: gm})
		}
	}
	return out
}

// candidateRotations returns the 23 non-trivial proper rotations of the cube,
// the rotations by 2 pi/3 and 2 pi/6 about z, and those by 2 pi/k about z for
// every k > 0 of orders, without repeats.
func candidateRotations(orders []int) [][9]float64 {
	var out [][9]float64
	add := func(q [9]float64) {
		for _, o := range out {
			if maxDiff9(o, q) < 1e-14 {
				return
			}
		}
		out = append(out, q)
	}
	perms := [6][3]int{{0, 1, 2}, {1, 2, 0}, {2, 0, 1}, {0, 2, 1}, {2, 1, 0}, {1, 0, 2}}
	for pi, p := range perms {
		for s := 0; s < 8; s++ {
			var q [9]float64
			det := 1.0
			if pi >= 3 {
				det = -1 // odd permutation
			}
			for r := 0; r < 3; r++ {
				v := 1.0
				if s&(1<<r) != 0 {
					v = -1
					det = -det
				}
				q[3*r+p[r]] = v
			}
			if det > 0 && !(pi == 0 && s == 0) {
				add(q)
			}
		}
	}
	for _, k := range append([]int{3, 6}, orders...) {
		if k <= 1 {
			continue
		}
		c, s := math.Cos(2*math.Pi/float64(k)), math.Sin(2*math.Pi/float64(k))
		add([9]float64{c, -s, 0, s, c, 0, 0, 0, 1})
	}
	return out
}

// azimuthalOrder returns 2m for a Gauss product rule of m x 2m points (its
// points are invariant under the rotation by pi/m about z) and 0 otherwise.
func azimuthalOrder(r sphere.Rule) int {
	if !strings.HasPrefix(r.Name, "Gauss product ") {
		return 0
	}
	return r.Degree + 1
}

func maxDiff9(a, b [9]float64) float64 {
	d := 0.0
	for i := range a {
		d = math.Max(d, math.Abs(a[i]-b[i]))
	}
	return d
}

// groupImage returns the map of group indices under the site permutation p
// (the sites of group g move to group img[g]), nil when it is the identity,
// and false when p does not move every group (and the sites without a group)
// wholly onto one.
func groupImage(m *cluster.Model, groups []string, p []int) ([]int, bool) {
	index := map[string]int{"": -1}
	for g, name := range groups {
		index[name] = g
	}
	img := make([]int, len(groups))
	for g := range img {
		img[g] = -2
	}
	for i, s := range m.Sites {
		from, to := index[s.Group], index[m.Sites[p[i]].Group]
		if from == -1 || to == -1 {
			if from != to {
				return nil, false
			}
			continue
		}
		if img[from] != -2 && img[from] != to {
			return nil, false
		}
		img[from] = to
	}
	hit := make([]bool, len(groups))
	identity := true
	for g, to := range img {
		if to < 0 || hit[to] {
			return nil, false
		}
		hit[to] = true
		identity = identity && to == g
	}
	if identity {
		return nil, true
	}
	return img, true
}

// permutationSearch looks, for a rotation Q, for a site permutation P with
//
//	Q K_ab Q^T = K_P(a)P(b) for every pair of sites (K = 0 without a bond,
//	K transposed for a bond stored the other way round),
//	Q (A_i e_z e_z^T) Q^T = A_P(i) e_z e_z^T,  Q g_i Q^T = g_P(i),  S_P(i) = S_i,
//
// and P moving every group (and the sites without one) wholly onto a group,
// to cluster.SymmetryTolerance of the largest coupling (or g element). The
// identity is tried first; otherwise a depth-first search assigns the sites
// in an order that follows the bonds, each to a site with the required spin,
// g tensor and single-ion term, checking every pair with the sites already
// assigned. It gives up (no permutation) after maxSearchSteps assignments,
// which only loses a reduction.
type permutationSearch struct {
	m          *cluster.Model
	groupOf    []int          // group index per site, -1 for none
	k          map[[2]int]int // bond index by (a, b)
	coupling   [][9]float64
	neighbours [][]int
	eTol, gTol float64
}

const maxSearchSteps = 100000

func newPermutationSearch(m *cluster.Model, groups []string) *permutationSearch {
	n := len(m.Sites)
	c := &permutationSearch{m: m, groupOf: make([]int, n), k: map[[2]int]int{}, neighbours: make([][]int, n)}
	index := map[string]int{"": -1}
	for g, name := range groups {
		index[name] = g
	}
	var eScale, gScale float64
	for i, s := range m.Sites {
		c.groupOf[i] = index[s.Group]
		eScale = math.Max(eScale, math.Abs(s.SingleIon))
		for _, g := range s.G {
			gScale = math.Max(gScale, math.Abs(g))
		}
	}
	for i, b := range m.Bonds {
		k := b.Coupling()
		c.coupling = append(c.coupling, k)
		for _, x := range k {
			eScale = math.Max(eScale, math.Abs(x))
		}
		c.k[[2]int{b.A, b.B}] = i
		c.neighbours[b.A] = append(c.neighbours[b.A], b.B)
		c.neighbours[b.B] = append(c.neighbours[b.B], b.A)
	}
	c.eTol = cluster.SymmetryTolerance * eScale
	c.gTol = cluster.SymmetryTolerance * gScale
	return c
}

// pair returns the coupling matrix of the ordered pair (a, b).
func (c *permutationSearch) pair(a, b int) [9]float64 {
	if j, ok := c.k[[2]int{a, b}]; ok {
		return c.coupling[j]
	}
	if j, ok := c.k[[2]int{b, a}]; ok {
		return transpose9(c.coupling[j])
	}
	return [9]float64{}
}

// find returns a permutation P for Q, if there is one.
func (c *permutationSearch) find(q [9]float64) ([]int, bool) {
	m := c.m
	n := len(m.Sites)
	// Candidates of every site by spin, g tensor and single-ion term.
	cand := make([][]int, n)
	for i, s := range m.Sites {
		g := conjugate(q, s.G)
		a := conjugate(q, singleIonTensor(s.SingleIon))
		for j, t := range m.Sites {
			if t.TwoS == s.TwoS && (c.groupOf[i] < 0) == (c.groupOf[j] < 0) &&
				maxDiff9(g, t.G) <= c.gTol && maxDiff9(a, singleIonTensor(t.SingleIon)) <= c.eTol {
				cand[i] = append(cand[i], j)
			}
		}
		if len(cand[i]) == 0 {
			return nil, false
		}
	}
	// Rotated couplings of the bonded pairs, by ordered pair.
	rotated := make(map[[2]int][9]float64, 2*len(m.Bonds))
	for i, b := range m.Bonds {
		r := conjugate(q, c.coupling[i])
		rotated[[2]int{b.A, b.B}] = r
		rotated[[2]int{b.B, b.A}] = transpose9(r)
	}
	// Assignment order: the most constrained site first, then along bonds.
	order := make([]int, 0, n)
	placed := make([]bool, n)
	for len(order) < n {
		start := -1
		for i := range cand {
			if !placed[i] && (start < 0 || len(cand[i]) < len(cand[start])) {
				start = i
			}
		}
		queue := []int{start}
		placed[start] = true
		for len(queue) > 0 {
			a := queue[0]
			queue = queue[1:]
			order = append(order, a)
			for _, b := range c.neighbours[a] {
				if !placed[b] {
					placed[b] = true
					queue = append(queue, b)
				}
			}
		}
	}
	p := make([]int, n)
	for i := range p {
		p[i] = -1
	}
	used := make([]bool, n)
	ng := 0
	for _, g := range c.groupOf {
		ng = max(ng, g+1)
	}
	gimg := make([]int, ng) // group image, -1 unset
	gcount := make([]int, ng)
	gused := make([]int, ng) // how many groups map onto each group
	for i := range gimg {
		gimg[i] = -1
	}
	// consistent checks the pairs of a with the assigned sites, and a itself.
	consistent := func(a, j int) bool {
		if ga := c.groupOf[a]; ga >= 0 {
			gj := c.groupOf[j]
			if gimg[ga] >= 0 && gimg[ga] != gj {
				return false
			}
			if gimg[ga] < 0 && gused[gj] > 0 {
				return false
			}
		}
		for b := range p {
			if p[b] < 0 || b == a {
				continue
			}
			if maxDiff9(rotated[[2]int{a, b}], c.pair(j, p[b])) > c.eTol {
				return false
			}
		}
		return true
	}
	steps := 0
	var assign func(k int) bool
	assign = func(k int) bool {
		if k == n {
			return true
		}
		a := order[k]
		for _, j := range cand[a] {
			if used[j] || !consistent(a, j) {
				continue
			}
			if steps++; steps > maxSearchSteps {
				return false
			}
			p[a], used[j] = j, true
			ga := c.groupOf[a]
			if ga >= 0 {
				if gcount[ga] == 0 {
					gimg[ga] = c.groupOf[j]
					gused[gimg[ga]]++
				}
				gcount[ga]++
			}
			if assign(k + 1) {
				return true
			}
			if ga >= 0 {
				gcount[ga]--
				if gcount[ga] == 0 {
					gused[gimg[ga]]--
					gimg[ga] = -1
				}
			}
			p[a], used[j] = -1, false
		}
		return false
	}
	// The identity first: the common case, and the cheapest.
	id := true
	for i := range p {
		p[i], used[i] = i, true
	}
	for i := 0; i < n && id; i++ {
		p[i] = -1
		used[i] = false
		if !containsInt(cand[i], i) || !consistent(i, i) {
			id = false
		}
		p[i], used[i] = i, true
	}
	if id {
		return p, true
	}
	for i := range p {
		p[i], used[i] = -1, false
	}
	if !assign(0) {
		return nil, false
	}
	return p, true
}

func containsInt(xs []int, x int) bool {
	for _, y := range xs {
		if y == x {
			return true
		}
	}
	return false
}

// conjugate returns Q X Q^T (row-major 3x3).
func conjugate(q, x [9]float64) [9]float64 {
	var t, out [9]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for k := 0; k < 3; k++ {
				t[3*i+j] += q[3*i+k] * x[3*k+j]
			}
		}
	}
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for k := 0; k < 3; k++ {
				out[3*i+j] += t[3*i+k] * q[3*j+k]
			}
		}
	}
	return out
}

func transpose9(k [9]float64) [9]float64 {
	return [9]float64{k[0], k[3], k[6], k[1], k[4], k[7], k[2], k[5], k[8]}
}

// singleIonTensor is A e_z e_z^T: the term A (S^z)^2 as S . (A e_z e_z^T) S.
func singleIonTensor(a float64) [9]float64 { return [9]float64{8: a} }

func apply3(q [9]float64, v [3]float64) [3]float64 {
	return [3]float64{
		q[0]*v[0] + q[1]*v[1] + q[2]*v[2],
		q[3]*v[0] + q[4]*v[1] + q[5]*v[2],
		q[6]*v[0] + q[7]*v[1] + q[8]*v[2],
	}
}

// rotationName names a rotation by its order and axis, as "C4[0,0,1]"
// (the axis scaled to integers where it is one of the cube's), and -1 as
// "time reversal".
func rotationName(q [9]float64) string {
	if maxDiff9(q, [9]float64{-1, 0, 0, 0, -1, 0, 0, 0, -1}) == 0 {
		return "time reversal"
	}
	c := math.Max(-1, math.Min(1, (q[0]+q[4]+q[8]-1)/2))
	theta := math.Acos(c)
	var a [3]float64
	if theta < math.Pi-1e-6 {
		a = [3]float64{q[7] - q[5], q[2] - q[6], q[3] - q[1]}
	} else {
		// Q = 2 a a^T - 1: the column of Q + 1 with the largest diagonal.
		best := 0
		for i := 1; i < 3; i++ {
			if q[4*i] > q[4*best] {
				best = i
			}
		}
		a = [3]float64{q[best] + b2f(best == 0), q[3+best] + b2f(best == 1), q[6+best] + b2f(best == 2)}
	}
	// Scale the smallest non-zero component to 1 in size, first non-zero
	// component positive.
	small, first := math.Inf(1), 0.0
	for _, x := range a {
		if math.Abs(x) > 1e-9 {
			small = math.Min(small, math.Abs(x))
			if first == 0 {
				first = x
			}
		}
	}
	if first < 0 {
		small = -small
	}
	parts := make([]string, 3)
	for i, x := range a {
		v := x / small
		if math.Abs(v-math.Round(v)) < 1e-6 {
			parts[i] = strconv.Itoa(int(math.Round(v)))
		} else {
			parts[i] = strconv.FormatFloat(v, 'g', 3, 64)
		}
	}
	return fmt.Sprintf("C%d[%s]", int(math.Round(2*math.Pi/theta)), strings.Join(parts, ","))
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// pointIndex finds a rule's point from its coordinates (to 1e-9).
type pointIndex struct {
	points [][3]float64
	cells  map[[3]int64]int
}

const pointCell = 1e-7

func cellOf(v [3]float64) [3]int64 {
	return [3]int64{int64(math.Round(v[0] / pointCell)), int64(math.Round(v[1] / pointCell)), int64(math.Round(v[2] / pointCell))}
}

func newPointIndex(points [][3]float64) *pointIndex {
	ix := &pointIndex{points: points, cells: make(map[[3]int64]int, len(points))}
	for i, p := range points {
		ix.cells[cellOf(p)] = i
	}
	return ix
}

// lookup returns the index of the point within 1e-9 of v in every
// coordinate.
func (ix *pointIndex) lookup(v [3]float64) (int, bool) {
	c := cellOf(v)
	near := func(i int) bool {
		p := ix.points[i]
		return math.Abs(p[0]-v[0]) <= 1e-9 && math.Abs(p[1]-v[1]) <= 1e-9 && math.Abs(p[2]-v[2]) <= 1e-9
	}
	if i, ok := ix.cells[c]; ok && near(i) {
		return i, true
	}
	for dx := int64(-1); dx <= 1; dx++ {
		for dy := int64(-1); dy <= 1; dy++ {
			for dz := int64(-1); dz <= 1; dz++ {
				if i, ok := ix.cells[[3]int64{c[0] + dx, c[1] + dy, c[2] + dz}]; ok && near(i) {
					return i, true
				}
			}
		}
	}
	return 0, false
}

// images returns the index of q n_k for every point n_k, or false when q does
// not map the points onto themselves.
func (ix *pointIndex) images(q [9]float64) ([]int, bool) {
	out := make([]int, len(ix.points))
	for k, p := range ix.points {
		j, ok := ix.lookup(apply3(q, p))
		if !ok {
			return nil, false
		}
		out[k] = j
	}
	return out, true
}

// assignDirections gives every point of rule its source: the orbits of the
// rotations that map the rule's points onto themselves are found by a
// breadth-first walk; an orbit with a point of the finer rule (fineIdx, with
// its sources fineSrc) takes its values from there, any other orbit adds its
// first point to pp.dirs. It returns the sources and the rotations used.
func assignDirections(rule sphere.Rule, idx *pointIndex, rot []spinRotation, pp *powderPlan, fineIdx *pointIndex, fineSrc []pointSource) ([]pointSource, []spinRotation) {
	var use []spinRotation
	var images [][]int
	for _, r := range rot {
		if img, ok := idx.images(r.q); ok {
			use = append(use, r)
			images = append(images, img)
		}
	}
	n := len(rule.Points)
	src := make([]pointSource, n)
	done := make([]bool, n)
	spread := func(start int, s pointSource) {
		src[start], done[start] = s, true
		queue := []int{start}
		for len(queue) > 0 {
			k := queue[0]
			queue = queue[1:]
			for ri, r := range use {
				k2 := images[ri][k]
				if done[k2] {
					continue
				}
				// Group g at n is group r.groups[g] at q n: group h at
				// q n is group r.groups^-1[h] at n.
				src[k2] = pointSource{eval: src[k].eval, groups: composeInverse(src[k].groups, r.groups)}
				done[k2] = true
				queue = append(queue, k2)
			}
		}
	}
	if fineIdx != nil {
		for k, p := range rule.Points {
			if done[k] {
				continue
			}
			if f, ok := fineIdx.lookup(p); ok {
				spread(k, fineSrc[f])
			}
		}
	}
	for k, p := range rule.Points {
		if !done[k] {
			pp.dirs = append(pp.dirs, p)
			spread(k, pointSource{eval: len(pp.dirs) - 1})
		}
	}
	return src, use
}

// composeInverse returns pi o sigma^-1 (nil stands for the identity).
func composeInverse(pi, sigma []int) []int {
	if sigma == nil {
		return pi
	}
	out := make([]int, len(sigma))
	for g, h := range sigma {
		// sigma(g) = h, so sigma^-1(h) = g and (pi o sigma^-1)(h) = pi(g).
		if pi == nil {
			out[h] = g
		} else {
			out[h] = pi[g]
		}
	}
	return out
}

// describeSymmetry says what reduced the directions.
func describeSymmetry(reduce bool, used []spinRotation) string {
	if !reduce {
		return "none: every direction evaluated"
	}
	var names []string
	seen := map[string]bool{}
	rotations, permuted := 0, 0
	hasTR := false
	for _, r := range used {
		if r.name == "time reversal" {
			hasTR = true
			continue
		}
		rotations++
		if r.permuted {
			permuted++
		}
		if !seen[r.name] {
			seen[r.name] = true
			names = append(names, r.name)
		}
	}
	sort.Strings(names)
	out := "none"
	if hasTR {
		out = "time reversal (n ~ -n)"
	}
	if rotations > 0 {
		if len(names) > 8 {
			names = append(names[:8], "...")
		}
		out += fmt.Sprintf("; %d spin rotations (%s)", rotations, strings.Join(names, " "))
		if permuted > 0 {
			out += fmt.Sprintf(", %d of them with a site permutation", permuted)
		}
	}
	return out
}

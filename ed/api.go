package ed

import "context"

// MuBOverKB is mu_B/k_B in K/T (CODATA 2018): the one constant linking field
// and energy. A spin with moment g S in a field B has Zeeman energy
// -MuBOverKB * g * B * S^z kelvin.
const MuBOverKB = 0.67171381563

// DefaultMaxMemory is the memory a task may use when Limits.MaxMemory is 0.
const DefaultMaxMemory = 4 << 30

// Limits bound what a task may allocate. Both are checked before anything
// large is allocated; a task over a limit is refused with a *LimitError.
type Limits struct {
	// MaxMemory in bytes; 0 means DefaultMaxMemory.
	MaxMemory int64
}

// Progress receives the stage name and the count of finished units of work
// out of total. It is called from the goroutine that runs the task.
type Progress func(stage string, done, total int)

// Options are shared by every task. The zero value is ready to use.
type Options struct {
	Limits Limits
	// Progress may be nil.
	Progress Progress
	// Workers is the number of goroutines for independent sectors and field
	// points; 0 means runtime.GOMAXPROCS(0).
	Workers int
}

// Sector describes one diagonalized block.
type Sector struct {
	Label     string
	HasSz     bool
	Sz        float64
	Dimension int
}

// Report says what the engine decided: method, route, sectors, memory.
type Report struct {
	Method           string
	Route            string
	Dimension        int64
	Sectors          []Sector
	Complex          bool
	MemoryBytes      int64 // peak estimate with one block at a time (bytes)
	Diagonalizations int
	Solver           string
	Warnings         []string
	// Matvecs counts the Hamiltonian applications of the Lanczos route.
	Matvecs int64
	// Symmetry describes the symmetry sectors used beyond S^z.
	Symmetry string
	// Eigenvectors counts the eigenvectors the dense route computed, summed
	// over its diagonalizations; EigenvectorsSkipped the eigenstates it
	// solved without one, because their Boltzmann weight is negligible at
	// every temperature of the task (see NeglectedWeight). Both are 0 where
	// no eigenvector was needed.
	Eigenvectors, EigenvectorsSkipped int64
	// NeglectedWeight is the largest share of a partition function, over the
	// fields and temperatures, that the eigenstates without eigenvectors
	// carry: the thermal averages of the moments leave those states out, and
	// are exact to NeglectedWeight times the largest |moment| (mu_B). It is
	// at most 1e-15 by construction, and 0 where every eigenvector was
	// computed.
	NeglectedWeight float64
}

// Level is a group of degenerate eigenstates sharing their good quantum numbers.
type Level struct {
	Energy       float64 // K
	Degeneracy   int
	HasSz        bool
	Sz           float64
	HasTotalSpin bool
	TotalSpin    float64
}

// Method chooses how a task diagonalizes.
type Method string

// The methods. MethodAuto (also "") picks full diagonalization where it
// fits and is cheap, Lanczos otherwise, and the report says which it took.
const (
	MethodAuto    Method = "auto"
	MethodFull    Method = "full"
	MethodLanczos Method = "lanczos"
	// MethodFTLM is the finite-temperature Lanczos method of Thermo.
	MethodFTLM Method = "ftlm"
)

// DefaultLanczosLevels is the number of levels the Lanczos route finds when
// a request asks for all of them (Levels 0) on a cluster too large for full
// diagonalization.
const DefaultLanczosLevels = 10

// AutoDenseLimit is the largest block that MethodAuto diagonalizes densely
// when only the lowest levels are asked for.
const AutoDenseLimit = 2000

// LanczosOptions tune the Lanczos route; zero values select the defaults of
// package lanczos (residual tolerance 1e-10 relative to max(1, |E|), seed 0,
// at most 300 K + 1000 matrix-vector products per sector, a basis of
// max(2K + 20, 40) vectors).
type LanczosOptions struct {
	Tol           float64
	Seed          uint64
	MaxIterations int
	Basis         int
	// Multiplicities completes the multiplicities of levels degenerate
	// within one sector (at the cost of at least one more convergence run
	// per sector); without it such a level may appear fewer times than its
	// degeneracy, and the result warns.
	Multiplicities bool
}

// SpectrumRequest asks for the spectrum at one field.
type SpectrumRequest struct {
	Field  [3]float64 // B in T
	Levels int        // lowest K eigenvalues; 0 = all
	Method Method
	// Lanczos tunes the Lanczos route.
	Lanczos LanczosOptions
	// Correlations asks for the ground state's <S_i . S_j> and <S_i^z>
	// (Lanczos route).
	Correlations bool
	// NoSpatialSymmetry keeps the Lanczos route to S^z sectors (for
	// checks and comparisons).
	NoSpatialSymmetry bool
	// Sectors, when not empty, restricts the Lanczos route to the sectors
	// whose labels contain every comma-separated component of one entry,
	// for example "Sz=0" or "Sz=0, T1:k=15/30". Levels of other sectors are
	// then missing, and the result says so.
	Sectors []string
}

// GroundState holds the correlations of the ground state found by the
// Lanczos route, in the symmetry sector Sector.
type GroundState struct {
	Energy float64 // K
	Sector string
	Sites  []string
	// Axis is the quantization axis of Sz (the field direction where the
	// engine turned the frame onto it, z otherwise).
	Axis [3]float64
	// Sz[i] = <S_i^z>; SzSz and SpinSpin are N x N, row-major:
	// <S_i^z S_j^z> and <S_i . S_j> (the diagonal is S_i (S_i + 1)).
	Sz, SzSz, SpinSpin []float64
	// Spin is N x 3, row-major: the local spin <S_i> = (<S_i^x>, <S_i^y>,
	// <S_i^z>) in the lab frame (hbar = 1; the moment is g_i^T <S_i> mu_B).
	Spin []float64
}

// SpectrumResult: Energies ascending with multiplicity (K); Levels grouped.
type SpectrumResult struct {
	Field       [3]float64
	Energies    []float64
	Levels      []Level
	Truncated   bool
	TotalStates int64
	// Residuals[i] = ||H y - E_i y|| of each energy's Ritz vector (K), from
	// the Lanczos route; nil after full diagonalization.
	Residuals []float64
	// GroundState when the request asked for correlations.
	GroundState *GroundState
	Report      Report
}

// ThermoRequest asks for thermodynamics at one field on a temperature grid.
type ThermoRequest struct {
	Temperatures []float64  // K, each > 0
	Field        [3]float64 // B in T
	// Method: auto (full diagonalization where it fits, FTLM otherwise),
	// full or ftlm.
	Method Method
	FTLM   FTLMOptions
	// NoSpatialSymmetry keeps FTLM to S^z sectors.
	NoSpatialSymmetry bool
}

// ThermoResult holds parallel arrays, one entry per temperature. Units: K,
// k_B, k_B, mu_B and mu_B/T per cluster.
type ThermoResult struct {
	Field          [3]float64
	Direction      [3]float64 // unit vector of M and chi (z at zero field)
	Temperature    []float64
	Energy         []float64
	SpecificHeat   []float64
	Entropy        []float64
	Magnetization  []float64
	Susceptibility []float64
	// The one-standard-deviation statistical errors of each value, from the
	// FTLM route (nil after full diagonalization, which is exact).
	EnergyError, SpecificHeatError, EntropyError, MagnetizationError, SusceptibilityError []float64
	Report                                                                                Report
}

// MagnetizationRequest asks for M(B) along one direction at several temperatures.
type MagnetizationRequest struct {
	Temperatures []float64  // K, each >= 0 (0: ground-state limit)
	Fields       []float64  // field magnitudes in T along Direction
	Direction    [3]float64 // any non-zero vector; zero means z
	// Susceptibility asks for dM/dB along the field at every point as well
	// (isothermal, with the Van Vleck part), in mu_B/T per cluster. At
	// T = 0 it is reported as 0: the zero-temperature derivative away from
	// level crossings (at a crossing M jumps).
	Susceptibility bool
	// Powder > 0 asks for the powder average over the field directions of a
	// quadrature rule on the sphere with at least Powder points (the rule
	// chosen is reported; at most sphere.MaxPoints); Direction must then be
	// zero. Negative is refused.
	Powder int
	// Method: auto (full diagonalization where it fits, finite-temperature
	// Lanczos otherwise), full or ftlm. FTLM needs T > 0 and gives no group
	// moments. With one effective g along the field (M = g S^z with S^z
	// conserved) one set of samples serves every field; otherwise each
	// field is its own FTLM run (three with Susceptibility), so the cost
	// grows with the number of fields.
	Method Method
	FTLM   FTLMOptions
	// NoSpatialSymmetry keeps FTLM to S^z sectors.
	NoSpatialSymmetry bool
}

// Curve is M(B) at one temperature: one value per field, mu_B per cluster;
// Groups maps each site group to its moment along the field.
type Curve struct {
	Temperature   float64
	Magnetization []float64
	Groups        map[string][]float64
	// Susceptibility is dM/dB along the field, mu_B/T per cluster, when the
	// request asked for it.
	Susceptibility []float64
	// MagnetizationError and SusceptibilityError are the one-standard-
	// deviation statistical errors of the FTLM route (nil when exact). In
	// a powder average they are sum_k |w_k| sigma_k over the directions, a
	// bound that holds however the directions' errors are correlated.
	MagnetizationError, SusceptibilityError []float64
}

// MagnetizationResult holds one curve per temperature.
type MagnetizationResult struct {
	Field []float64
	// Direction is the unit field direction; zero for a powder average.
	Direction  [3]float64
	Curves     []Curve
	Saturation float64 // sum_i |g_i^T n| S_i, mu_B (powder: its average)
	// GroupSaturation is, per group, the sum over its sites of |g_i^T n| S_i
	// (mu_B; powder: its average).
	GroupSaturation map[string]float64
	// Powder describes the quadrature of a powder average; nil otherwise.
	Powder *PowderReport
	Report Report
}

// PowderReport says how a powder average was taken and how converged it is.
type PowderReport struct {
	Rule       string // for example "Lebedev 26"
	Directions int    // points of the rule
	Degree     int    // highest degree of polynomials on the sphere integrated exactly
	// Evaluated is the number of distinct directions computed after the
	// symmetry reduction, those that only the coarser rule needs included.
	Evaluated int
	Symmetry  string // what reduced the directions, for example "time reversal (n ~ -n)"
	// The same average with the next coarser rule (of lower degree): the
	// convergence estimate. CoarseRule is "none" (and CoarseDirections 0)
	// for the 6-point rule, which has no coarser one.
	CoarseRule       string
	CoarseDirections int
	// Deviation is max |M_rule - M_coarse| over every point of every curve
	// (mu_B per cluster); RelativeDeviation is Deviation / Saturation.
	Deviation         float64
	RelativeDeviation float64
}

// The three tasks. Each validates its request, plans sectors and memory
// before allocating, honours ctx cancellation and reports progress.
//
//	func Spectrum(ctx context.Context, m *cluster.Model, req SpectrumRequest, opt Options) (*SpectrumResult, error)
//	func Thermo(ctx context.Context, m *cluster.Model, req ThermoRequest, opt Options) (*ThermoResult, error)
//	func Magnetization(ctx context.Context, m *cluster.Model, req MagnetizationRequest, opt Options) (*MagnetizationResult, error)
//
// Errors: *LimitError when the task needs more memory than Limits allow,
// *RequestError for a bad request (it names the field), ctx.Err() on cancel.
var _ = context.Background

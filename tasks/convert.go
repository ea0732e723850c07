package tasks

import (
	"fmt"
	"maps"
	"slices"

	"google.golang.org/protobuf/proto"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// ParameterError reports a parameters message that cannot be converted to an
// engine request. Field is the protojson name of the offending field.
type ParameterError struct {
	Field  string
	Reason string
}

func (e *ParameterError) Error() string {
	return fmt.Sprintf("%s: %s", e.Field, e.Reason)
}

// vector3 converts a repeated field that must hold 0 or 3 numbers; 0 numbers
// give the zero vector.
func vector3(field string, v []float64) ([3]float64, error) {
	var out [3]float64
	switch len(v) {
	case 0:
		return out, nil
	case 3:
		copy(out[:], v)
		return out, nil
	}
	return out, &ParameterError{Field: field, Reason: fmt.Sprintf("needs 0 or 3 numbers, got %d", len(v))}
}

func vectorToProto(v [3]float64) []float64 { return []float64{v[0], v[1], v[2]} }

// SpectrumRequestFromProto converts spectrum parameters (nil means all
// defaults) to an engine request.
func SpectrumRequestFromProto(p *frustumv1.SpectrumParameters) (ed.SpectrumRequest, error) {
	field, err := vector3("field", p.GetField())
	if err != nil {
		return ed.SpectrumRequest{}, err
	}
	l := p.GetLanczos()
	return ed.SpectrumRequest{Field: field, Levels: int(p.GetLevels()), Method: ed.Method(p.GetMethod()),
		Lanczos:      ed.LanczosOptions{Tol: l.GetTolerance(), Seed: l.GetSeed(), MaxIterations: int(l.GetMaxIterations()), Basis: int(l.GetBasis()), Multiplicities: l.GetMultiplicities()},
		Correlations: p.GetCorrelations(), NoSpatialSymmetry: p.GetNoSpatialSymmetry(), Sectors: slices.Clone(p.GetSectors())}, nil
}

// SpectrumParametersToProto converts an engine request to spectrum parameters.
func SpectrumParametersToProto(r ed.SpectrumRequest) *frustumv1.SpectrumParameters {
	p := &frustumv1.SpectrumParameters{Field: vectorToProto(r.Field), Levels: int32(r.Levels), Method: string(r.Method),
		Correlations: r.Correlations, NoSpatialSymmetry: r.NoSpatialSymmetry, Sectors: slices.Clone(r.Sectors)}
	if r.Lanczos != (ed.LanczosOptions{}) {
		p.Lanczos = &frustumv1.LanczosParameters{Tolerance: r.Lanczos.Tol, Seed: r.Lanczos.Seed,
			MaxIterations: int32(r.Lanczos.MaxIterations), Basis: int32(r.Lanczos.Basis), Multiplicities: r.Lanczos.Multiplicities}
	}
	return p
}

// ThermoRequestFromProto converts thermo parameters (nil means all defaults)
// to an engine request.
func ThermoRequestFromProto(p *frustumv1.ThermoParameters) (ed.ThermoRequest, error) {
	field, err := vector3("field", p.GetField())
	if err != nil {
		return ed.ThermoRequest{}, err
	}
	f := p.GetFtlm()
	return ed.ThermoRequest{Temperatures: slices.Clone(p.GetTemperatures()), Field: field, Method: ed.Method(p.GetMethod()),
		FTLM:              ed.FTLMOptions{Vectors: int(f.GetVectors()), Steps: int(f.GetSteps()), Seed: f.GetSeed(), ExactBelow: int(f.GetExactBelow())},
		NoSpatialSymmetry: p.GetNoSpatialSymmetry()}, nil
}

// ThermoParametersToProto converts an engine request to thermo parameters.
func ThermoParametersToProto(r ed.ThermoRequest) *frustumv1.ThermoParameters {
	p := &frustumv1.ThermoParameters{Temperatures: slices.Clone(r.Temperatures), Field: vectorToProto(r.Field), Method: string(r.Method),
		NoSpatialSymmetry: r.NoSpatialSymmetry}
	p.Ftlm = ftlmToProto(r.FTLM)
	return p
}

// MagnetizationRequestFromProto converts magnetization parameters (nil means
// all defaults) to an engine request.
func MagnetizationRequestFromProto(p *frustumv1.MagnetizationParameters) (ed.MagnetizationRequest, error) {
	dir, err := vector3("direction", p.GetDirection())
	if err != nil {
		return ed.MagnetizationRequest{}, err
	}
	return ed.MagnetizationRequest{
		Temperatures:   slices.Clone(p.GetTemperatures()),
		Fields:         slices.Clone(p.GetFields()),
		Direction:      dir,
		Powder:         int(p.GetPowder()),
		Susceptibility: p.GetSusceptibility(),
		Method:         ed.Method(p.GetMethod()),
		FTLM: ed.FTLMOptions{Vectors: int(p.GetFtlm().GetVectors()), Steps: int(p.GetFtlm().GetSteps()),
			Seed: p.GetFtlm().GetSeed(), ExactBelow: int(p.GetFtlm().GetExactBelow())},
		NoSpatialSymmetry: p.GetNoSpatialSymmetry(),
	}, nil
}

// MagnetizationParametersToProto converts an engine request to magnetization
// parameters.
func MagnetizationParametersToProto(r ed.MagnetizationRequest) *frustumv1.MagnetizationParameters {
	return &frustumv1.MagnetizationParameters{
		Temperatures:      slices.Clone(r.Temperatures),
		Fields:            slices.Clone(r.Fields),
		Direction:         vectorToProto(r.Direction),
		Powder:            int32(r.Powder),
		Susceptibility:    r.Susceptibility,
		Method:            string(r.Method),
		NoSpatialSymmetry: r.NoSpatialSymmetry,
		Ftlm:              ftlmToProto(r.FTLM),
	}
}

// ReportToProto converts the engine's report.
func ReportToProto(r ed.Report) *frustumv1.EngineReport {
	out := &frustumv1.EngineReport{
		Method:              r.Method,
		Route:               r.Route,
		Dimension:           r.Dimension,
		Sectors:             make([]*frustumv1.Sector, len(r.Sectors)),
		Complex:             r.Complex,
		MemoryBytes:         r.MemoryBytes,
		Diagonalizations:    int64(r.Diagonalizations),
		Solver:              r.Solver,
		Warnings:            slices.Clone(r.Warnings),
		Matvecs:             r.Matvecs,
		Symmetry:            r.Symmetry,
		Eigenvectors:        r.Eigenvectors,
		EigenvectorsSkipped: r.EigenvectorsSkipped,
		NeglectedWeight:     r.NeglectedWeight,
	}
	for i, s := range r.Sectors {
		ps := &frustumv1.Sector{Label: s.Label, Dimension: int64(s.Dimension)}
		if s.HasSz {
			ps.Sz = proto.Float64(s.Sz)
		}
		out.Sectors[i] = ps
	}
	return out
}

// ReportFromProto converts a report message back to the engine's form; nil
// gives the zero report.
func ReportFromProto(p *frustumv1.EngineReport) ed.Report {
	out := ed.Report{
		Method:              p.GetMethod(),
		Route:               p.GetRoute(),
		Dimension:           p.GetDimension(),
		Complex:             p.GetComplex(),
		MemoryBytes:         p.GetMemoryBytes(),
		Diagonalizations:    int(p.GetDiagonalizations()),
		Solver:              p.GetSolver(),
		Warnings:            slices.Clone(p.GetWarnings()),
		Matvecs:             p.GetMatvecs(),
		Symmetry:            p.GetSymmetry(),
		Eigenvectors:        p.GetEigenvectors(),
		EigenvectorsSkipped: p.GetEigenvectorsSkipped(),
		NeglectedWeight:     p.GetNeglectedWeight(),
	}
	for _, s := range p.GetSectors() {
		out.Sectors = append(out.Sectors, ed.Sector{
			Label:     s.GetLabel(),
			HasSz:     s.Sz != nil,
			Sz:        s.GetSz(),
			Dimension: int(s.GetDimension()),
		})
	}
	return out
}

// LevelToProto converts one level; sz and totalSpin are set only where the
// engine says they are good quantum numbers.
func LevelToProto(l ed.Level) *frustumv1.Level {
	out := &frustumv1.Level{Energy: l.Energy, Degeneracy: int32(l.Degeneracy)}
	if l.HasSz {
		out.Sz = proto.Float64(l.Sz)
	}
	if l.HasTotalSpin {
		out.TotalSpin = proto.Float64(l.TotalSpin)
	}
	return out
}

// LevelFromProto converts a level message back to the engine's form.
func LevelFromProto(p *frustumv1.Level) ed.Level {
	return ed.Level{
		Energy:       p.GetEnergy(),
		Degeneracy:   int(p.GetDegeneracy()),
		HasSz:        p.Sz != nil,
		Sz:           p.GetSz(),
		HasTotalSpin: p.TotalSpin != nil,
		TotalSpin:    p.GetTotalSpin(),
	}
}

// SpectrumResultToProto converts a spectrum result of the cluster named name.
func SpectrumResultToProto(name string, r *ed.SpectrumResult) *frustumv1.SpectrumResult {
	out := &frustumv1.SpectrumResult{
		ClusterName: name,
		Field:       vectorToProto(r.Field),
		Energies:    slices.Clone(r.Energies),
		Levels:      make([]*frustumv1.Level, len(r.Levels)),
		Truncated:   r.Truncated,
		TotalStates: r.TotalStates,
		Engine:      ReportToProto(r.Report),
		Residuals:   slices.Clone(r.Residuals),
	}
	for i, l := range r.Levels {
		out.Levels[i] = LevelToProto(l)
	}
	if g := r.GroundState; g != nil {
		out.GroundState = &frustumv1.GroundState{Energy: g.Energy, Sector: g.Sector, Sites: slices.Clone(g.Sites),
			Axis: vectorToProto(g.Axis), Sz: slices.Clone(g.Sz), SzSz: slices.Clone(g.SzSz), SpinSpin: slices.Clone(g.SpinSpin), Spin: slices.Clone(g.Spin)}
	}
	return out
}

// SpectrumResultFromProto converts a spectrum result message back to the
// engine's form and returns the cluster name beside it.
func SpectrumResultFromProto(p *frustumv1.SpectrumResult) (string, *ed.SpectrumResult, error) {
	field, err := vector3("field", p.GetField())
	if err != nil {
		return "", nil, err
	}
	out := &ed.SpectrumResult{
		Field:       field,
		Energies:    slices.Clone(p.GetEnergies()),
		Truncated:   p.GetTruncated(),
		TotalStates: p.GetTotalStates(),
		Report:      ReportFromProto(p.GetEngine()),
		Residuals:   slices.Clone(p.GetResiduals()),
	}
	for _, l := range p.GetLevels() {
		out.Levels = append(out.Levels, LevelFromProto(l))
	}
	if g := p.GetGroundState(); g != nil {
		axis, err := vector3("ground_state.axis", g.GetAxis())
		if err != nil {
			return "", nil, err
		}
		out.GroundState = &ed.GroundState{Energy: g.GetEnergy(), Sector: g.GetSector(), Sites: slices.Clone(g.GetSites()),
			Axis: axis, Sz: slices.Clone(g.GetSz()), SzSz: slices.Clone(g.GetSzSz()), SpinSpin: slices.Clone(g.GetSpinSpin()), Spin: slices.Clone(g.GetSpin())}
	}
	return p.GetClusterName(), out, nil
}

// ThermoResultToProto converts a thermo result of the cluster named name.
func ThermoResultToProto(name string, r *ed.ThermoResult) *frustumv1.ThermoResult {
	return &frustumv1.ThermoResult{
		ClusterName:             name,
		Field:                   vectorToProto(r.Field),
		Temperature:             slices.Clone(r.Temperature),
		Energy:                  slices.Clone(r.Energy),
		SpecificHeat:            slices.Clone(r.SpecificHeat),
		Entropy:                 slices.Clone(r.Entropy),
		Magnetization:           slices.Clone(r.Magnetization),
		Susceptibility:          slices.Clone(r.Susceptibility),
		SusceptibilityDirection: vectorToProto(r.Direction),
		Engine:                  ReportToProto(r.Report),
		EnergyError:             slices.Clone(r.EnergyError),
		SpecificHeatError:       slices.Clone(r.SpecificHeatError),
		EntropyError:            slices.Clone(r.EntropyError),
		MagnetizationError:      slices.Clone(r.MagnetizationError),
		SusceptibilityError:     slices.Clone(r.SusceptibilityError),
	}
}

// ThermoResultFromProto converts a thermo result message back to the
// engine's form and returns the cluster name beside it.
func ThermoResultFromProto(p *frustumv1.ThermoResult) (string, *ed.ThermoResult, error) {
	field, err := vector3("field", p.GetField())
	if err != nil {
		return "", nil, err
	}
	dir, err := vector3("susceptibilityDirection", p.GetSusceptibilityDirection())
	if err != nil {
		return "", nil, err
	}
	return p.GetClusterName(), &ed.ThermoResult{
		Field:          field,
		Direction:      dir,
		Temperature:    slices.Clone(p.GetTemperature()),
		Energy:         slices.Clone(p.GetEnergy()),
		SpecificHeat:   slices.Clone(p.GetSpecificHeat()),
		Entropy:        slices.Clone(p.GetEntropy()),
		Magnetization:  slices.Clone(p.GetMagnetization()),
		Susceptibility: slices.Clone(p.GetSusceptibility()),
		Report:         ReportFromProto(p.GetEngine()),
		EnergyError:    slices.Clone(p.GetEnergyError()), SpecificHeatError: slices.Clone(p.GetSpecificHeatError()),
		EntropyError: slices.Clone(p.GetEntropyError()), MagnetizationError: slices.Clone(p.GetMagnetizationError()),
		SusceptibilityError: slices.Clone(p.GetSusceptibilityError()),
	}, nil
}

// MagnetizationResultToProto converts a magnetization result of the cluster
// named name.
func MagnetizationResultToProto(name string, r *ed.MagnetizationResult) *frustumv1.MagnetizationResult {
	out := &frustumv1.MagnetizationResult{
		ClusterName: name,
		Field:       slices.Clone(r.Field),
		Direction:   vectorToProto(r.Direction),
		Curves:      make([]*frustumv1.MagnetizationCurve, len(r.Curves)),
		Saturation:  r.Saturation,
		Engine:      ReportToProto(r.Report),
		Powder:      PowderToProto(r.Powder),
	}
	if len(r.GroupSaturation) > 0 {
		out.GroupSaturation = maps.Clone(r.GroupSaturation)
	}
	for i, c := range r.Curves {
		pc := &frustumv1.MagnetizationCurve{
			Temperature:         c.Temperature,
			Magnetization:       slices.Clone(c.Magnetization),
			Groups:              make(map[string]*frustumv1.GroupCurve, len(c.Groups)),
			Susceptibility:      slices.Clone(c.Susceptibility),
			MagnetizationError:  slices.Clone(c.MagnetizationError),
			SusceptibilityError: slices.Clone(c.SusceptibilityError),
		}
		for g, v := range c.Groups {
			pc.Groups[g] = &frustumv1.GroupCurve{Values: slices.Clone(v)}
		}
		out.Curves[i] = pc
	}
	return out
}

// MagnetizationResultFromProto converts a magnetization result message back
// to the engine's form and returns the cluster name beside it.
func MagnetizationResultFromProto(p *frustumv1.MagnetizationResult) (string, *ed.MagnetizationResult, error) {
	dir, err := vector3("direction", p.GetDirection())
	if err != nil {
		return "", nil, err
	}
	out := &ed.MagnetizationResult{
		Field:      slices.Clone(p.GetField()),
		Direction:  dir,
		Saturation: p.GetSaturation(),
		Report:     ReportFromProto(p.GetEngine()),
		Powder:     PowderFromProto(p.GetPowder()),
	}
	if len(p.GetGroupSaturation()) > 0 {
		out.GroupSaturation = maps.Clone(p.GetGroupSaturation())
	}
	for _, c := range p.GetCurves() {
		curve := ed.Curve{
			Temperature:         c.GetTemperature(),
			Magnetization:       slices.Clone(c.GetMagnetization()),
			Groups:              make(map[string][]float64, len(c.GetGroups())),
			Susceptibility:      slices.Clone(c.GetSusceptibility()),
			MagnetizationError:  slices.Clone(c.GetMagnetizationError()),
			SusceptibilityError: slices.Clone(c.GetSusceptibilityError()),
		}
		for g, v := range c.GetGroups() {
			curve.Groups[g] = slices.Clone(v.GetValues())
		}
		out.Curves = append(out.Curves, curve)
	}
	return p.GetClusterName(), out, nil
}

// ftlmToProto converts FTLM options; the defaults give nil.
func ftlmToProto(o ed.FTLMOptions) *frustumv1.FtlmParameters {
	if o == (ed.FTLMOptions{}) {
		return nil
	}
	return &frustumv1.FtlmParameters{Vectors: int32(o.Vectors), Steps: int32(o.Steps), Seed: o.Seed, ExactBelow: int32(o.ExactBelow)}
}

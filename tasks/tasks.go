package tasks

import (
	"context"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// Model validates a cluster message and returns the engine's model of it.
func Model(c *frustumv1.Cluster) (*cluster.Model, error) {
	if c == nil {
		return nil, &ParameterError{Field: "cluster", Reason: "missing"}
	}
	return cluster.FromProto(c)
}

// Spectrum returns the spectrum of cluster c at the field of p (nil p: zero
// field, every level).
func Spectrum(ctx context.Context, c *frustumv1.Cluster, p *frustumv1.SpectrumParameters, opt ed.Options) (*frustumv1.SpectrumResult, error) {
	req, err := SpectrumRequestFromProto(p)
	if err != nil {
		return nil, err
	}
	m, err := Model(c)
	if err != nil {
		return nil, err
	}
	res, err := ed.Spectrum(ctx, m, req, opt)
	if err != nil {
		return nil, err
	}
	return SpectrumResultToProto(m.Name, res), nil
}

// Thermo returns the thermodynamics of cluster c on the temperatures of p.
func Thermo(ctx context.Context, c *frustumv1.Cluster, p *frustumv1.ThermoParameters, opt ed.Options) (*frustumv1.ThermoResult, error) {
	req, err := ThermoRequestFromProto(p)
	if err != nil {
		return nil, err
	}
	m, err := Model(c)
	if err != nil {
		return nil, err
	}
	res, err := ed.Thermo(ctx, m, req, opt)
	if err != nil {
		return nil, err
	}
	return ThermoResultToProto(m.Name, res), nil
}

// Magnetization returns the magnetization curves of cluster c, one per
// temperature of p, on the fields of p.
func Magnetization(ctx context.Context, c *frustumv1.Cluster, p *frustumv1.MagnetizationParameters, opt ed.Options) (*frustumv1.MagnetizationResult, error) {
	req, err := MagnetizationRequestFromProto(p)
	if err != nil {
		return nil, err
	}
	m, err := Model(c)
	if err != nil {
		return nil, err
	}
	res, err := ed.Magnetization(ctx, m, req, opt)
	if err != nil {
		return nil, err
	}
	return MagnetizationResultToProto(m.Name, res), nil
}

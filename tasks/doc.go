// Package tasks runs Frustum's four tasks on the API vocabulary: it is the
// one edge between the proto messages of package frustumv1 and the plain Go
// types of the engine, package ed.
//
// # Overview
//
// Each task takes a Cluster message and the task's parameters message,
// converts them once, runs the engine and converts the engine's result back,
// with every field of the result message filled and the engine's report
// included:
//
//	Spectrum(ctx, cluster, *SpectrumParameters, opt)           -> *SpectrumResult
//	Thermo(ctx, cluster, *ThermoParameters, opt)               -> *ThermoResult
//	Magnetization(ctx, cluster, *MagnetizationParameters, opt) -> *MagnetizationResult
//	Fit(ctx, *FitParameters, opt)                              -> *FitResult
//
// A fit carries its clusters in FitParameters.models (JobSpec.cluster stays
// empty) and runs compare.Fit; its errors name the fields of the parameters
// (data.temperature[3], models[1].bonds[0].b, vary[0].paths[1]), under
// "spec.fit." in Plan and Run.
//
// The command line (cmd/frustum) calls these in-process; a service calls the
// same functions, so both give the same answer to the same message.
//
// # Errors
//
// A parameters message with a vector of the wrong length (field and
// direction take 0 or 3 numbers) is refused with a *ParameterError that
// names the field by its protojson name. A cluster that does not validate is
// refused with the cluster package's error, which names the cluster field.
// The engine's *ed.RequestError, *ed.LimitError and ctx.Err() pass through
// unchanged, so that callers can tell them apart with errors.As.
//
// # JSON
//
// MarshalJSON is the one protojson encoding used for every message that
// Frustum prints or stores as JSON: lowerCamelCase field names, two-space
// indentation and every field present, empty ones included. Field names
// are therefore those of the contract (energies, levels, specificHeat, ...).
// The protojson package deliberately varies insignificant white space between
// builds, so compare such output as JSON, never byte for byte.
package tasks

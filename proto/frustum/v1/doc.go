// Package frustumv1 is the Frustum API vocabulary: the cluster model, task
// parameters and results, generated from frustum.proto.
//
// Regenerate with `go generate ./proto/...` (needs protoc from Debian's
// protobuf-compiler; generate.sh installs the pinned protoc-gen-go).
package frustumv1

//go:generate sh generate.sh

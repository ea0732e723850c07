//go:build lapack && !cgo

package eigen

// The LAPACK backend calls LAPACKE and OpenBLAS through cgo: a build with
// -tags lapack needs CGO_ENABLED=1 and a C compiler (and Debian's
// liblapacke-dev and libopenblas-dev). This declaration makes such a build
// fail with the reason in the error message rather than fall back silently.
var LAPACK Backend = the_lapack_build_tag_needs_cgo_CGO_ENABLED_1

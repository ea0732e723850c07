//go:build !lapack

package eigen

// Default returns the backend this build selected: PureGo (build with
// -tags lapack, and cgo, for LAPACK).
func Default() Backend { return PureGo }

//go:build lapack

package eigen

// Default returns the backend this build selected: LAPACK (the build tag
// lapack is set).
func Default() Backend { return LAPACK }

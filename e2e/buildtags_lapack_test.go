//go:build lapack

package e2e

// With -tags lapack the in-process runs use the LAPACK dense solver: so must
// the frustumd they are compared with.
func init() { frustumdBuildTags = append(frustumdBuildTags, "lapack") }

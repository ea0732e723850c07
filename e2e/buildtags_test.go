package e2e

// frustumdBuildTags are the build tags of frustumd in these tests: those of
// the test binary that change results (buildtags_lapack_test.go adds
// lapack, which selects the dense solver).
var frustumdBuildTags []string

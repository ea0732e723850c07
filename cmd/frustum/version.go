package main

import (
	"context"
	"fmt"
	"io"
	"runtime"
	"runtime/debug"

	"frustum/ed/eigen"
)

// version is the program version.
const version = "0.1.0"

func runVersion(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "", "Prints the version of frustum, the dense eigensolver backend it was built\nwith (pure Go, or LAPACK over OpenBLAS with go build -tags lapack), and the\nGo toolchain.", "frustum version")
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	tags := ""
	if bi, ok := debug.ReadBuildInfo(); ok {
		for _, s := range bi.Settings {
			if s.Key == "-tags" && s.Value != "" {
				tags = ", -tags " + s.Value
			}
		}
	}
	fmt.Fprintf(stdout, "frustum %s\ndense solver: %s\nbuilt with %s for %s/%s%s\n", version, eigen.Solver, runtime.Version(), runtime.GOOS, runtime.GOARCH, tags)
	return nil
}

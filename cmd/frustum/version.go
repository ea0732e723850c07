package main

import (
	"context"
	"fmt"
	"io"
	"runtime"

	"frustum/ed/eigen"
)

// version is the program version.
const version = "0.1.0"

func runVersion(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "", "Prints the version of frustum, the dense eigensolver backend it was built\nwith, and the Go toolchain.", "frustum version")
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "frustum %s\ndense solver: %s\nbuilt with %s for %s/%s\n", version, eigen.Solver, runtime.Version(), runtime.GOOS, runtime.GOARCH)
	return nil
}

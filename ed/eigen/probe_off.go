//go:build !eigenprobe

package eigen

// probeEnabled is false in normal builds: the polls cost one atomic load.
// Build with -tags eigenprobe to time the stretches between polls.
const probeEnabled = false

func probe() {}

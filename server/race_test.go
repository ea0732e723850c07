//go:build race

package server

// raceEnabled: the race detector slows the engine about tenfold, so the
// slow test jobs are made smaller.
const raceEnabled = true

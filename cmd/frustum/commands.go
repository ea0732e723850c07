package main

import (
	"context"
	"fmt"
	"io"

	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// clusterFlag registers --cluster.
func clusterFlag(fs *flagSet, path *string) {
	fs.stringFlag(path, "cluster", "the cluster `FILE` (JSON, the protojson of a Cluster message; see testdata/)")
}

// loadCluster reads the cluster file of --cluster.
func loadCluster(path string) (*frustumv1.Cluster, error) {
	if path == "" {
		return nil, usagef("--cluster FILE is required")
	}
	m, err := cluster.LoadFile(path)
	if err != nil {
		return nil, fmt.Errorf("--cluster: %w", err)
	}
	return m.ToProto(), nil
}

func runSpectrum(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "--cluster FILE [--field Bx,By,Bz] [--levels K] [--json | --csv] [--max-memory SIZE]",
		`Prints the energy levels of the cluster at one field: each level's energy (K),
its energy above the ground state, its degeneracy, and its total S^z and total
spin S where those are good quantum numbers. --csv prints one row per level;
with --json, "energies" holds every eigenvalue with multiplicity, ascending,
and "levels" the grouped levels.`,
		`frustum spectrum --cluster testdata/dimer.json
frustum spectrum --cluster testdata/triangle-dm.json --field 0,0,10 --levels 4 --json`)
	var (
		path   string
		field  [3]float64
		given  bool
		levels int
		out    outputFlags
	)
	clusterFlag(fs, &path)
	fs.funcFlag("field", "magnetic field `Bx,By,Bz` in T (default 0,0,0)", vectorFlag("field", &field, &given, false))
	fs.funcFlag("levels", "print the lowest `K` energies only (default 0: all)", levelsFlag(&levels))
	out.register(fs)
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	if err := out.check(); err != nil {
		return err
	}
	c, err := loadCluster(path)
	if err != nil {
		return err
	}
	p := &frustumv1.SpectrumParameters{Field: field[:], Levels: int32(levels)}
	res, err := tasks.Spectrum(ctx, c, p, out.options(stderr))
	if err != nil {
		return err
	}
	return printResult(stdout, stderr, out, res, func(w io.Writer) error { return spectrumTable(w, res) },
		func(w io.Writer) error { return spectrumCSV(w, res) })
}

func runThermo(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "--cluster FILE --temps GRID [--field Bx,By,Bz] [--json | --csv] [--max-memory SIZE]",
		`Prints the thermodynamics of the cluster at one field, one row per
temperature: the energy <H> (K), the specific heat C (k_B), the entropy S
(k_B), the magnetization M along the field (mu_B; 0 at zero field) and the
isothermal susceptibility chi = dM/dB along the field, or along z at zero
field (mu_B/T, Van Vleck part included). All per cluster.

A GRID is a number (5), a list (1,2,5), a linear range with both ends
included (0:15:61) or a logarithmic one (log:0.5:300:100). Temperatures must
be > 0 K.`,
		`frustum thermo --cluster testdata/dimer.json --temps log:0.5:300:100
frustum thermo --cluster testdata/spin1-chain.json --temps 1,2,5,10 --field 0,0,2 --csv`)
	var (
		path  string
		temps []float64
		field [3]float64
		given bool
		out   outputFlags
	)
	clusterFlag(fs, &path)
	fs.funcFlag("temps", "temperatures in K, a `GRID` (required)", gridFlag(&temps))
	fs.funcFlag("field", "magnetic field `Bx,By,Bz` in T (default 0,0,0)", vectorFlag("field", &field, &given, false))
	out.register(fs)
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	if err := out.check(); err != nil {
		return err
	}
	if temps == nil {
		return usagef("--temps GRID is required")
	}
	c, err := loadCluster(path)
	if err != nil {
		return err
	}
	p := &frustumv1.ThermoParameters{Temperatures: temps, Field: field[:]}
	res, err := tasks.Thermo(ctx, c, p, out.options(stderr))
	if err != nil {
		return err
	}
	return printResult(stdout, stderr, out, res, func(w io.Writer) error { return thermoTable(w, res) },
		func(w io.Writer) error { return thermoCSV(w, res) })
}

func runMagnetization(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "--cluster FILE --temps GRID --fields GRID [--direction x,y,z] [--json | --csv] [--max-memory SIZE]",
		`Prints magnetization curves M(B), one per temperature: the moment of the
whole cluster along the field direction and that of each site group (the
"group" tags of the cluster file), in mu_B per cluster, at each field
magnitude B (T) along --direction. Negative fields point against the
direction. Temperatures must be >= 0 K; 0 is the ground-state limit.

A GRID is a number (5), a list (1,2,5), a linear range with both ends
included (0:15:61) or a logarithmic one (log:0.5:300:100).`,
		`frustum magnetization --cluster testdata/demo-multimer.json --temps 2,5,10 --fields 0:15:61
frustum magnetization --cluster testdata/star-mixed.json --temps 0.5 --fields 0:40:81 --direction 1,1,0 --csv`)
	var (
		path         string
		temps        []float64
		fields       []float64
		direction    [3]float64
		hasDirection bool
		out          outputFlags
	)
	clusterFlag(fs, &path)
	fs.funcFlag("temps", "temperatures in K, a `GRID` (required)", gridFlag(&temps))
	fs.funcFlag("fields", "field magnitudes in T along the direction, a `GRID` (required)", gridFlag(&fields))
	fs.funcFlag("direction", "field direction `x,y,z`, any length but not zero (default 0,0,1)", vectorFlag("direction", &direction, &hasDirection, true))
	out.register(fs)
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	if err := out.check(); err != nil {
		return err
	}
	if temps == nil {
		return usagef("--temps GRID is required")
	}
	if fields == nil {
		return usagef("--fields GRID is required")
	}
	c, err := loadCluster(path)
	if err != nil {
		return err
	}
	p := &frustumv1.MagnetizationParameters{Temperatures: temps, Fields: fields}
	if hasDirection {
		p.Direction = direction[:]
	}
	res, err := tasks.Magnetization(ctx, c, p, out.options(stderr))
	if err != nil {
		return err
	}
	return printResult(stdout, stderr, out, res, func(w io.Writer) error { return magnetizationTable(w, res) },
		func(w io.Writer) error { return magnetizationCSV(w, res) })
}

// printResult writes res as JSON, CSV or a table; with JSON or CSV the
// engine's warnings also go to stderr, since stdout is for the data alone.
func printResult(stdout, stderr io.Writer, out outputFlags, res proto.Message, table, csv func(io.Writer) error) error {
	switch {
	case out.json:
		b, err := tasks.MarshalJSON(res)
		if err != nil {
			return err
		}
		if _, err := stdout.Write(b); err != nil {
			return err
		}
	case out.csv:
		if err := csv(stdout); err != nil {
			return err
		}
	default:
		return table(stdout)
	}
	for _, w := range engineOf(res).GetWarnings() {
		fmt.Fprintf(stderr, "frustum: warning: %s\n", oneLine(w))
	}
	return nil
}

func engineOf(m proto.Message) *frustumv1.EngineReport {
	switch r := m.(type) {
	case *frustumv1.SpectrumResult:
		return r.GetEngine()
	case *frustumv1.ThermoResult:
		return r.GetEngine()
	case *frustumv1.MagnetizationResult:
		return r.GetEngine()
	}
	return nil
}

package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"strconv"

	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	"frustum/ed"
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

// task is one of the three tasks: its own flags, which build a JobSpec, how
// it runs in-process, and how its result prints. The task commands, their
// --server form and submit all share it, so that the same flags give the
// same spec and the same result prints the same way.
type task struct {
	name     string
	synopsis string // the task's own flags
	about    string
	example  string
	// flags registers the task's own flags and returns the function that
	// builds the spec from them once they are parsed.
	flags func(fs *flagSet) func() (*frustumv1.JobSpec, error)
	// local runs spec in-process.
	local func(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error)
	// table and csv print a result of the task.
	table, csv func(w io.Writer, res proto.Message) error
}

func tasksList() []*task { return []*task{spectrumTask, thermoTask, magnetizationTask, fitTask} }

func findTask(name string) *task {
	for _, t := range tasksList() {
		if t.name == name {
			return t
		}
	}
	return nil
}

var spectrumTask = &task{
	name:     "spectrum",
	synopsis: "--cluster FILE [--field Bx,By,Bz] [--levels K] [--method auto|full|lanczos] [--correlations] [--tol TOL] [--seed N] [--multiplicities] [--sector SEL ...] [--no-spatial-symmetry]",
	about: `Prints the energy levels of the cluster at one field: each level's energy (K),
its energy above the ground state, its degeneracy, and its total S^z and total
spin S where those are good quantum numbers. --csv prints one row per level;
with --json, "energies" holds every eigenvalue with multiplicity, ascending,
and "levels" the grouped levels.

--method auto (the default) diagonalizes fully where that fits and is
cheap, and otherwise finds the lowest levels with Lanczos in symmetry
sectors: total S^z, the one-dimensional representations of an abelian group
of the cluster's symmetries (its declared ones, or the automorphisms found
when it declares none) and spin inversion at S^z = 0. The Lanczos route
reports the residual ||H y - E y|| of every level, and says which sectors
and symmetries it used; --correlations adds the ground state's local
spins <S_i> and its correlations <S_i . S_j>.`,
	example: `frustum spectrum --cluster testdata/dimer.json
frustum spectrum --cluster testdata/triangle-dm.json --field 0,0,10 --levels 4 --json`,
	flags: func(fs *flagSet) func() (*frustumv1.JobSpec, error) {
		var (
			path   string
			field  [3]float64
			given  bool
			levels int
			method string
			corr   bool
			noSym  bool
			lp     frustumv1.LanczosParameters
		)
		clusterFlag(fs, &path)
		fs.funcFlag("field", "magnetic field `Bx,By,Bz` in T (default 0,0,0)", vectorFlag("field", &field, &given, false))
		fs.funcFlag("levels", "print the lowest `K` energies only (default 0: all)", levelsFlag(&levels))
		fs.stringFlag(&method, "method", "`METHOD`: auto (default), full or lanczos")
		fs.boolFlag(&corr, "correlations", "also the ground state's <S_i> and <S_i . S_j> (Lanczos)")
		fs.funcFlag("tol", "Lanczos residual tolerance `TOL`, relative to max(1, |E|) (default 1e-10)", func(s string) error {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil || !(v > 0) || math.IsInf(v, 0) {
				return fmt.Errorf("%q: want a positive number", s)
			}
			lp.Tolerance = v
			return nil
		})
		fs.funcFlag("seed", "seed `N` of the Lanczos start vectors (default 0)", func(s string) error {
			v, err := strconv.ParseUint(s, 10, 64)
			if err != nil {
				return fmt.Errorf("%q: want a whole number >= 0", s)
			}
			lp.Seed = v
			return nil
		})
		fs.boolFlag(&lp.Multiplicities, "multiplicities", "complete the multiplicities of levels degenerate within one Lanczos sector (slower)")
		fs.boolFlag(&noSym, "no-spatial-symmetry", "Lanczos in S^z sectors only, without the cluster's symmetries")
		var sectors []string
		fs.funcFlag("sector", "solve only the Lanczos sectors whose labels contain every component of `SEL`, such as 'Sz=0' or 'Sz=0, T1:k=15/30' (repeat for several)", func(s string) error {
			sectors = append(sectors, s)
			return nil
		})
		return func() (*frustumv1.JobSpec, error) {
			switch method {
			case "", "auto", "full", "lanczos":
			default:
				return nil, usagef("--method %q: want auto, full or lanczos", method)
			}
			c, err := loadCluster(path)
			if err != nil {
				return nil, err
			}
			p := &frustumv1.SpectrumParameters{Field: field[:], Levels: int32(levels), Method: method, Correlations: corr, NoSpatialSymmetry: noSym, Sectors: sectors}
			if lp.Tolerance != 0 || lp.Seed != 0 || lp.Multiplicities {
				p.Lanczos = &lp
			}
			return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Spectrum{Spectrum: p}}, nil
		}
	},
	local: func(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error) {
		return tasks.Spectrum(ctx, spec.GetCluster(), spec.GetSpectrum(), opt)
	},
	table: func(w io.Writer, res proto.Message) error { return spectrumTable(w, res.(*frustumv1.SpectrumResult)) },
	csv:   func(w io.Writer, res proto.Message) error { return spectrumCSV(w, res.(*frustumv1.SpectrumResult)) },
}

var thermoTask = &task{
	name:     "thermo",
	synopsis: "--cluster FILE --temps GRID [--field Bx,By,Bz] [--method auto|full|ftlm] [--vectors R] [--steps M] [--seed N] [--no-spatial-symmetry]",
	about: `Prints the thermodynamics of the cluster at one field, one row per
temperature: the energy <H> (K), the specific heat C (k_B), the entropy S
(k_B), the magnetization M along the field (mu_B; 0 at zero field) and the
isothermal susceptibility chi = dM/dB along the field, or along z at zero
field (mu_B/T, Van Vleck part included). All per cluster.

A GRID is a number (5), a list (1,2,5), a linear range with both ends
included (0:15:61) or a logarithmic one (log:0.5:300:100). Temperatures must
be > 0 K.

--method auto (the default) diagonalizes fully where that fits, and
otherwise uses finite-temperature Lanczos (FTLM) in symmetry sectors: R
random vectors of M Lanczos steps per sector (--vectors, --steps; sectors of
at most 400 states exactly), every value with its statistical error (one
standard deviation, jackknife over the random vectors). Where the moment
along the field is not g S^z (sites with other g, g tensors, DM with a
transverse field) M is the FTLM estimate of <M> at the field and chi a
central difference at B +- h with the same random vectors (three runs).`,
	example: `frustum thermo --cluster testdata/dimer.json --temps log:0.5:300:100
frustum thermo --cluster testdata/spin1-chain.json --temps 1,2,5,10 --field 0,0,2 --csv`,
	flags: func(fs *flagSet) func() (*frustumv1.JobSpec, error) {
		var (
			path   string
			temps  []float64
			field  [3]float64
			given  bool
			method string
			noSym  bool
			fp     frustumv1.FtlmParameters
		)
		clusterFlag(fs, &path)
		fs.funcFlag("temps", "temperatures in K, a `GRID` (required)", gridFlag(&temps))
		fs.funcFlag("field", "magnetic field `Bx,By,Bz` in T (default 0,0,0)", vectorFlag("field", &field, &given, false))
		ftlmFlags(fs, &method, &fp, &noSym)
		return func() (*frustumv1.JobSpec, error) {
			if temps == nil {
				return nil, usagef("--temps GRID is required")
			}
			if err := checkFTLMMethod(method); err != nil {
				return nil, err
			}
			c, err := loadCluster(path)
			if err != nil {
				return nil, err
			}
			p := &frustumv1.ThermoParameters{Temperatures: temps, Field: field[:], Method: method, NoSpatialSymmetry: noSym, Ftlm: ftlmOrNil(&fp)}
			return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Thermo{Thermo: p}}, nil
		}
	},
	local: func(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error) {
		return tasks.Thermo(ctx, spec.GetCluster(), spec.GetThermo(), opt)
	},
	table: func(w io.Writer, res proto.Message) error { return thermoTable(w, res.(*frustumv1.ThermoResult)) },
	csv:   func(w io.Writer, res proto.Message) error { return thermoCSV(w, res.(*frustumv1.ThermoResult)) },
}

var magnetizationTask = &task{
	name:     "magnetization",
	synopsis: "--cluster FILE --temps GRID --fields GRID [--direction x,y,z | --powder N] [--method auto|full|ftlm] [--vectors R] [--steps M] [--seed N]",
	about: `Prints magnetization curves M(B), one per temperature: the moment of the
whole cluster along the field direction and that of each site group (the
"group" tags of the cluster file), in mu_B per cluster, at each field
magnitude B (T) along --direction. Negative fields point against the
direction. Temperatures must be >= 0 K; 0 is the ground-state limit.

With --powder N the curves are averages over at least N field directions of
a quadrature rule on the sphere (the rule, the directions computed after the
cluster's symmetry, and the deviation from the next coarser rule, a
convergence estimate, are printed below the table).

A GRID is a number (5), a list (1,2,5), a linear range with both ends
included (0:15:61) or a logarithmic one (log:0.5:300:100).`,
	example: `frustum magnetization --cluster testdata/demo-multimer.json --temps 2,5,10 --fields 0:15:61
frustum magnetization --cluster testdata/star-mixed.json --temps 0.5 --fields 0:40:81 --direction 1,1,0 --csv`,
	flags: func(fs *flagSet) func() (*frustumv1.JobSpec, error) {
		var (
			path         string
			temps        []float64
			fields       []float64
			direction    [3]float64
			hasDirection bool
			powder       int
			method       string
			noSym        bool
			fp           frustumv1.FtlmParameters
		)
		clusterFlag(fs, &path)
		fs.funcFlag("temps", "temperatures in K, a `GRID` (required)", gridFlag(&temps))
		fs.funcFlag("fields", "field magnitudes in T along the direction, a `GRID` (required)", gridFlag(&fields))
		fs.funcFlag("direction", "field direction `x,y,z`, any length but not zero (default 0,0,1)", vectorFlag("direction", &direction, &hasDirection, true))
		fs.funcFlag("powder", "average over at least `N` field directions of a quadrature on the sphere (a powder)", powderFlag(&powder))
		ftlmFlags(fs, &method, &fp, &noSym)
		return func() (*frustumv1.JobSpec, error) {
			if temps == nil {
				return nil, usagef("--temps GRID is required")
			}
			if powder > 0 && hasDirection {
				return nil, usagef("--powder averages over every direction: leave out --direction")
			}
			if fields == nil {
				return nil, usagef("--fields GRID is required")
			}
			c, err := loadCluster(path)
			if err != nil {
				return nil, err
			}
			if err := checkFTLMMethod(method); err != nil {
				return nil, err
			}
			p := &frustumv1.MagnetizationParameters{Temperatures: temps, Fields: fields, Powder: int32(powder), Method: method, NoSpatialSymmetry: noSym, Ftlm: ftlmOrNil(&fp)}
			if hasDirection {
				p.Direction = direction[:]
			}
			return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Magnetization{Magnetization: p}}, nil
		}
	},
	local: func(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error) {
		return tasks.Magnetization(ctx, spec.GetCluster(), spec.GetMagnetization(), opt)
	},
	table: func(w io.Writer, res proto.Message) error {
		return magnetizationTable(w, res.(*frustumv1.MagnetizationResult))
	},
	csv: func(w io.Writer, res proto.Message) error {
		return magnetizationCSV(w, res.(*frustumv1.MagnetizationResult))
	},
}

// remoteAbout ends the help of each task command.
const remoteAbout = `

With --server HOST:PORT the task runs as a job on that frustumd instead of
in-process, and prints exactly the same output; on a terminal, a progress
line goes to stderr meanwhile. Interrupting cancels the job. (frustum submit
starts the job and returns at once.)`

// runTask is the command of task t: it runs in-process, or on a server with
// --server, and prints the result.
func runTask(t *task) func(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	return func(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
		fs := newFlagSet(cmd, t.synopsis+" [--json | --csv] [--max-memory SIZE] [--server HOST:PORT [--token-file FILE] [--tls-ca FILE]]",
			t.about+remoteAbout, t.example)
		build := t.flags(fs)
		var (
			out    outputFlags
			remote remoteFlags
		)
		out.register(fs)
		remote.register(fs, false)
		if err := fs.parse(args, stdout); err != nil {
			return err
		}
		if err := out.check(); err != nil {
			return err
		}
		if err := remote.check(); err != nil {
			return err
		}
		if remote.server != "" && out.maxMemory != 0 {
			return usagef("--max-memory limits in-process runs; with --server the server's operator sets the limit")
		}
		spec, err := build()
		if err != nil {
			return err
		}
		var res proto.Message
		if remote.server != "" {
			res, err = remote.run(ctx, spec, stderr)
		} else {
			res, err = t.local(ctx, spec, out.options(stderr))
		}
		if err != nil {
			return err
		}
		return printResult(stdout, stderr, out, res, func(w io.Writer) error { return t.table(w, res) },
			func(w io.Writer) error { return t.csv(w, res) })
	}
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
	case *frustumv1.FitResult:
		// The fit's own warnings and each model's, for stderr.
		e := &frustumv1.EngineReport{Warnings: r.GetWarnings()}
		for _, m := range r.GetModels() {
			for _, w := range m.GetWarnings() {
				e.Warnings = append(e.Warnings, m.GetName()+": "+w)
			}
			for _, w := range m.GetEngine().GetWarnings() {
				e.Warnings = append(e.Warnings, m.GetName()+": "+w)
			}
		}
		return e
	}
	return nil
}

// ftlmFlags registers --method, --vectors, --steps, --seed and
// --no-spatial-symmetry of the tasks with a finite-temperature Lanczos route.
func ftlmFlags(fs *flagSet, method *string, fp *frustumv1.FtlmParameters, noSym *bool) {
	fs.stringFlag(method, "method", "`METHOD`: auto (default), full or ftlm")
	fs.funcFlag("vectors", "FTLM random vectors `R` per sector (default 20)", func(s string) error {
		n, err := strconv.Atoi(s)
		if err != nil || n < 2 {
			return fmt.Errorf("%q: want a whole number >= 2", s)
		}
		fp.Vectors = int32(n)
		return nil
	})
	fs.funcFlag("steps", "FTLM Lanczos steps `M` per vector (default 100)", func(s string) error {
		n, err := strconv.Atoi(s)
		if err != nil || n < 1 {
			return fmt.Errorf("%q: want a whole number >= 1", s)
		}
		fp.Steps = int32(n)
		return nil
	})
	fs.funcFlag("seed", "seed `N` of the FTLM random vectors (default 0)", func(s string) error {
		v, err := strconv.ParseUint(s, 10, 64)
		if err != nil {
			return fmt.Errorf("%q: want a whole number >= 0", s)
		}
		fp.Seed = v
		return nil
	})
	fs.boolFlag(noSym, "no-spatial-symmetry", "FTLM in S^z sectors only, without the cluster's symmetries")
}

func checkFTLMMethod(method string) error {
	switch method {
	case "", "auto", "full", "ftlm":
		return nil
	}
	return usagef("--method %q: want auto, full or ftlm", method)
}

// ftlmOrNil returns fp, or nil when it holds only defaults.
func ftlmOrNil(fp *frustumv1.FtlmParameters) *frustumv1.FtlmParameters {
	if fp.GetVectors() == 0 && fp.GetSteps() == 0 && fp.GetSeed() == 0 {
		return nil
	}
	return fp
}

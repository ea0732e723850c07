package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	"frustum/client"
	"frustum/ed"
	"frustum/figure"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// The figures of frustum plot, by --kind.
var plotKinds = []string{"auto", "magnetization", "thermo", "fit", "collapse"}

const plotAbout = `Draws a result as a figure, a PNG or SVG image chosen by the extension of
--out. The result is a file written by "frustum TASK --json" (--input), or
the result of a finished job on frustumd (--job). The figure follows the
result: M(B) curves of "frustum magnetization", one per temperature (with
--groups the site groups dashed, with --polarization M/M_sat instead of M);
E, C, S and chi against T of "frustum thermo" in four panels (T on a log
scale when it spans more than a decade); the data, model curves and
residuals of "frustum fit", or with --kind collapse its data against the
scaling variable x = g mu_B B / (2 k_B T). --kind auto tells the result
by its fields. Units: K, T, mu_B per cluster, k_B per cluster, mu_B/T.

The level diagram has its own form:

  frustum plot zeeman --cluster FILE --fields GRID [--direction x,y,z] [--levels K] --out FILE

computes the spectrum in-process at every field along the direction and
draws the lowest levels against B, coloured by S^z, with the ground-state
level crossings marked; their fields (T) are printed on stderr. See
"frustum plot zeeman --help".

The path written goes to stderr; stdout stays empty.`

const plotExample = `frustum magnetization --cluster testdata/demo-multimer.json --temps 2,5,10 --fields 0:15:61 --json > m.json
frustum plot --input m.json --out m.png --groups
frustum plot --job 7f3a9c --out thermo.svg
frustum plot zeeman --cluster testdata/dimer.json --fields 0:15:151 --out zeeman.png`

// runPlot is frustum plot: a figure of a result file or of a job's result,
// or with the operand zeeman a level diagram computed in-process.
func runPlot(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	if len(args) > 0 && args[0] == "zeeman" {
		return runPlotZeeman(ctx, args[1:], stdout, stderr)
	}
	fs := newFlagSet(cmd, "(--input RESULT.json | --job ID) --out FILE.png|FILE.svg [--kind KIND] [--groups] [--polarization]\n"+
		"       [--width CM] [--height CM] "+serverSynopsis+"\n"+
		"       frustum plot zeeman --cluster FILE --fields GRID [--direction x,y,z] [--levels K] --out FILE",
		plotAbout, plotExample)
	var (
		input, job, out, kind string
		groups, polarization  bool
		size                  figureSize
		remote                remoteFlags
	)
	fs.stringFlag(&input, "input", "the result `FILE`, the protojson written by frustum TASK --json")
	fs.stringFlag(&job, "job", "draw the result of the finished job `ID` on frustumd instead")
	plotOutFlag(fs, &out)
	fs.stringFlag(&kind, "kind", "the `KIND` of figure: "+strings.Join(plotKinds, ", ")+" (default auto: by the result)")
	fs.boolFlag(&groups, "groups", "magnetization: add the moment of each site group, dashed")
	fs.boolFlag(&polarization, "polarization", "magnetization: draw M/M_sat instead of M")
	size.register(fs)
	remote.register(fs, true)
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	if kind == "" {
		kind = "auto"
	}
	switch {
	case input == "" && job == "":
		return usagef("give the result: --input FILE (written by frustum TASK --json) or --job ID")
	case input != "" && job != "":
		return usagef("--input and --job exclude each other: give one")
	case !slices.Contains(plotKinds, kind):
		if kind == "zeeman" {
			return usagef("--kind zeeman: the level diagram is its own form, frustum plot zeeman --cluster FILE --fields GRID --out FILE")
		}
		return usagef("--kind %q: give one of %s", kind, strings.Join(plotKinds, ", "))
	case input != "" && (remote.server != "" || remote.tokenFile != "" || remote.tlsCA != ""):
		return usagef("--server, --token-file and --tls-ca go with --job, not with --input")
	}
	if err := checkPlotOut(out); err != nil {
		return err
	}

	var (
		res    proto.Message
		source string
		err    error
	)
	if input != "" {
		source = "--input " + input
		res, err = readPlotInput(input, kind)
	} else {
		res, source, err = fetchJobResult(ctx, &remote, job)
	}
	if err != nil {
		return err
	}
	if kind == "auto" {
		kind = plotKindOf(res)
	}
	if (groups || polarization) && kind != "magnetization" {
		return usagef("--groups and --polarization apply to magnetization results; %s holds a %s", source, messageName(res))
	}

	var fig *figure.Figure
	switch r := res.(type) {
	case *frustumv1.MagnetizationResult:
		if kind != "magnetization" {
			return kindMismatch(kind, source, res)
		}
		fig, err = figure.Magnetization(r, figure.MagnetizationOptions{Groups: groups, Polarization: polarization})
	case *frustumv1.ThermoResult:
		if kind != "thermo" {
			return kindMismatch(kind, source, res)
		}
		fig, err = figure.Thermo(r)
	case *frustumv1.FitResult:
		switch kind {
		case "fit":
			fig, err = figure.Fit(r)
		case "collapse":
			fig, err = figure.Collapse(r)
		default:
			return kindMismatch(kind, source, res)
		}
	case *frustumv1.SpectrumResult:
		return fmt.Errorf("%s holds a spectrum at one field, which has no figure of its own; frustum plot zeeman draws the levels against the field", source)
	default:
		return fmt.Errorf("%s holds a %s, which frustum plot does not draw", source, messageName(res))
	}
	if err != nil {
		return fmt.Errorf("%s: %w", source, err)
	}
	return writeFigure(stderr, fig, out, size)
}

// figureSize is --width and --height.
type figureSize struct{ width, height float64 }

func (s *figureSize) register(fs *flagSet) {
	fs.funcFlag("width", "the width of the figure in `CM` (default: the figure's own, 16 to 18)", centimetreFlag(&s.width))
	fs.funcFlag("height", "the height of the figure in `CM` (default: the figure's own, 10 to 22)", centimetreFlag(&s.height))
}

// centimetreFlag parses a length in centimetres, > 0 and at most a metre.
func centimetreFlag(p *float64) func(string) error {
	return func(s string) error {
		v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
		if err != nil {
			return fmt.Errorf("%q is not a number of centimetres", s)
		}
		if !(v > 0) || v > 100 {
			return fmt.Errorf("%q: give a size in centimetres, > 0 and at most 100", s)
		}
		*p = v
		return nil
	}
}

// plotOutFlag registers --out.
func plotOutFlag(fs *flagSet, out *string) {
	fs.stringFlag(out, "out", "the image `FILE` to write: .png or .svg (required)")
}

// checkPlotOut refuses a missing --out or one of an unknown format before any
// work is done.
func checkPlotOut(out string) error {
	if out == "" {
		return usagef("--out FILE is required (FILE.png or FILE.svg)")
	}
	if _, err := figure.FormatOf(out); err != nil {
		return usagef("--out: %v", err)
	}
	return nil
}

// writeFigure saves fig to out and says so on stderr.
func writeFigure(stderr io.Writer, fig *figure.Figure, out string, size figureSize) error {
	if err := figure.Save(fig, out, size.width, size.height); err != nil {
		return fmt.Errorf("--out: %w", err)
	}
	fmt.Fprintf(stderr, "wrote %s\n", out)
	return nil
}

// plotInputs are the results that frustum plot reads, with the field
// that tells each apart from the others.
var plotInputs = []struct {
	kind   string // the --kind that reads it
	new    func() proto.Message
	marker string
}{
	{"fit", func() proto.Message { return new(frustumv1.FitResult) }, "models"},
	{"magnetization", func() proto.Message { return new(frustumv1.MagnetizationResult) }, "curves"},
	{"thermo", func() proto.Message { return new(frustumv1.ThermoResult) }, "specificHeat"},
	{"spectrum", func() proto.Message { return new(frustumv1.SpectrumResult) }, "levels"},
}

// readPlotInput reads the result file at path: as the result type of kind,
// or for auto as the one result type that accepts it (unknown fields
// refused), told apart by its own fields where several do.
func readPlotInput(path, kind string) (proto.Message, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("--input: %w", err)
	}
	strict := protojson.UnmarshalOptions{DiscardUnknown: false}
	if kind != "auto" {
		want := kind
		if want == "collapse" {
			want = "fit"
		}
		for _, t := range plotInputs {
			if t.kind == want {
				m := t.new()
				if err := strict.Unmarshal(b, m); err != nil {
					return nil, fmt.Errorf("--input %s is not a %s: %v", path, messageName(m), protoMessage(err))
				}
				return m, nil
			}
		}
	}
	var keys map[string]json.RawMessage
	if err := json.Unmarshal(b, &keys); err != nil {
		return nil, fmt.Errorf("--input %s is not a JSON object: %v", path, err)
	}
	var accepted []proto.Message
	var marked []proto.Message
	var firstErr error
	for _, t := range plotInputs {
		m := t.new()
		if err := strict.Unmarshal(b, m); err != nil {
			if _, ok := keys[t.marker]; ok || firstErr == nil {
				firstErr = err
			}
			continue
		}
		accepted = append(accepted, m)
		if _, ok := keys[t.marker]; ok {
			marked = append(marked, m)
		}
	}
	switch {
	case len(accepted) == 1:
		return accepted[0], nil
	case len(marked) == 1:
		return marked[0], nil
	case len(accepted) == 0:
		return nil, fmt.Errorf("--input %s is not a result written by frustum TASK --json: %v", path, protoMessage(firstErr))
	}
	var names []string
	for _, m := range accepted {
		names = append(names, messageName(m))
	}
	return nil, fmt.Errorf("--input %s reads as any of %s: give --kind", path, strings.Join(names, ", "))
}

// protoMessage is a protojson error without its "proto: " prefix and with
// its white space folded.
func protoMessage(err error) string {
	s := strings.TrimPrefix(err.Error(), "proto:")
	return strings.Join(strings.Fields(s), " ")
}

// fetchJobResult fetches the result of the finished job ID.
func fetchJobResult(ctx context.Context, remote *remoteFlags, id string) (proto.Message, string, error) {
	name := client.JobName(id)
	if name == "" || name == "jobs/" {
		return nil, "", usagef("--job: give the job ID")
	}
	c, err := remote.connect(ctx)
	if err != nil {
		return nil, "", err
	}
	defer c.Close()
	job, err := c.Get(ctx, name)
	if err != nil {
		return nil, "", remote.wrap(err)
	}
	switch job.GetState() {
	case frustumv1.Job_SUCCEEDED:
	case frustumv1.Job_FAILED, frustumv1.Job_CANCELLED:
		return nil, "", remote.wrap(client.NewJobError(job))
	default:
		return nil, "", fmt.Errorf("%s is %s and has no result yet (frustum watch %s follows it)", name, job.GetState(), strings.TrimPrefix(name, "jobs/"))
	}
	res := client.InlineResult(job)
	if res == nil {
		if res, err = c.Result(ctx, name); err != nil {
			return nil, "", remote.wrap(err)
		}
	}
	return res, name, nil
}

// plotKindOf is the figure that --kind auto draws for res.
func plotKindOf(res proto.Message) string {
	switch res.(type) {
	case *frustumv1.MagnetizationResult:
		return "magnetization"
	case *frustumv1.ThermoResult:
		return "thermo"
	case *frustumv1.FitResult:
		return "fit"
	}
	return "auto"
}

func kindMismatch(kind, source string, res proto.Message) error {
	return usagef("--kind %s does not fit %s, which holds a %s (its figure: --kind %s)", kind, source, messageName(res), plotKindOf(res))
}

// messageName is the short name of a message type, such as ThermoResult.
func messageName(m proto.Message) string {
	return string(m.ProtoReflect().Descriptor().Name())
}

const zeemanAbout = `Draws the Zeeman diagram of a cluster: its lowest levels (energies in K,
absolute) against the field magnitude B (T) along --direction, from the
spectrum computed in-process at every field of --fields. Levels are
followed across fields by their quantum numbers and coloured by S^z where
the cluster conserves it (else joined by rank). The ground-state level
crossings, where the ground level changes its S^z (or, without quantum
numbers, where the gap between the two lowest levels closes), are ringed
and marked by dotted lines; their fields, interpolated between grid
points, are printed on stderr, then the path written. Stdout stays empty.

--fields is a GRID (a list 1,2,5, a range 0:15:151 or log:0.1:30:100) of at
least two increasing field magnitudes in T; negative ones point against the
direction. --levels K draws every level that is among the lowest K at some
field (default 8; 0 draws them all).`

// runPlotZeeman is frustum plot zeeman.
func runPlotZeeman(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	sub := &command{name: "plot zeeman"}
	fs := newFlagSet(sub, "--cluster FILE --fields GRID [--direction x,y,z] [--levels K] --out FILE.png|FILE.svg\n"+
		"       [--width CM] [--height CM] [--max-memory SIZE]", zeemanAbout,
		`frustum plot zeeman --cluster testdata/dimer.json --fields 0:15:151 --out zeeman.png
frustum plot zeeman --cluster testdata/triangle-dm.json --fields 0:150:151 --direction 1,0,0 --levels 6 --out dm.svg`)
	var (
		path         string
		fields       []float64
		direction    [3]float64
		hasDirection bool
		levels       = 8
		out          string
		size         figureSize
		maxMemory    int64
	)
	clusterFlag(fs, &path)
	fs.funcFlag("fields", "field magnitudes in T along the direction, an increasing `GRID` (required)", gridFlag(&fields))
	fs.funcFlag("direction", "field direction `x,y,z`, any length but not zero (default 0,0,1)", vectorFlag("direction", &direction, &hasDirection, true))
	fs.funcFlag("levels", "draw the levels among the lowest `K` at some field (default 8; 0: all)", levelsFlag(&levels))
	plotOutFlag(fs, &out)
	size.register(fs)
	fs.funcFlag("max-memory", "refuse spectra that need more memory than `SIZE` (such as 512MiB, 4GiB; default 4GiB)", memoryFlag(&maxMemory))
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	if fields == nil {
		return usagef("zeeman: --fields GRID is required")
	}
	if len(fields) < 2 {
		return usagef("zeeman: --fields needs at least two fields for a diagram")
	}
	for i := 1; i < len(fields); i++ {
		if !(fields[i] > fields[i-1]) {
			return usagef("zeeman: --fields must increase: %v T follows %v T", fields[i], fields[i-1])
		}
	}
	if err := checkPlotOut(out); err != nil {
		return err
	}
	c, err := loadCluster(path)
	if err != nil {
		return err
	}
	n := [3]float64{0, 0, 1}
	if hasDirection {
		norm := math.Sqrt(direction[0]*direction[0] + direction[1]*direction[1] + direction[2]*direction[2])
		n = [3]float64{direction[0] / norm, direction[1] / norm, direction[2] / norm}
	}

	data := figure.ZeemanData{Field: fields, Lowest: levels}
	opt := ed.Options{Limits: ed.Limits{MaxMemory: maxMemory}}
	var warnings []string
	for _, B := range fields {
		p := &frustumv1.SpectrumParameters{Field: []float64{B * n[0], B * n[1], B * n[2]}}
		s, err := tasks.Spectrum(ctx, c, p, opt)
		if err != nil {
			return fmt.Errorf("spectrum at B = %v T: %w", B, err)
		}
		data.Spectra = append(data.Spectra, s)
		for _, w := range s.GetEngine().GetWarnings() {
			if !slices.Contains(warnings, w) {
				warnings = append(warnings, w)
			}
		}
	}
	fig, err := figure.Zeeman(data)
	if err != nil {
		return err
	}
	for _, w := range warnings {
		fmt.Fprintf(stderr, "frustum: warning: %s\n", oneLine(w))
	}
	crossings := figure.GroundCrossings(data)
	var b bytes.Buffer
	if len(crossings) == 0 {
		fmt.Fprintf(&b, "no ground-state crossing between %v and %v T\n", fields[0], fields[len(fields)-1])
	} else {
		parts := make([]string, len(crossings))
		for i, x := range crossings {
			parts[i] = strconv.FormatFloat(x, 'f', 4, 64)
		}
		fmt.Fprintf(&b, "ground-state crossings (T): %s\n", strings.Join(parts, ", "))
	}
	if _, err := stderr.Write(b.Bytes()); err != nil {
		return err
	}
	return writeFigure(stderr, fig, out, size)
}

// Command frustum diagonalizes small quantum spin clusters exactly and prints
// their spectrum, thermodynamics and magnetization curves.
//
// Usage:
//
//	frustum spectrum      --cluster FILE [--field Bx,By,Bz] [--levels K]
//	frustum thermo        --cluster FILE --temps GRID [--field Bx,By,Bz]
//	frustum magnetization --cluster FILE --temps GRID --fields GRID [--direction x,y,z | --powder N]
//	frustum fit --data FILE.csv --model FILE [--model FILE ...] [--observable polarization[:GROUP]]
//	            [--vary 'NAME=PATH[,PATH...]:MIN:MAX' ...] [--link global|per-temperature] [--powder N]
//	frustum submit TASK [the task's flags]
//	frustum jobs [--state STATE] [--json]
//	frustum job ID [--json]
//	frustum watch ID
//	frustum cancel ID
//	frustum delete ID
//	frustum plot (--input RESULT.json | --job ID | zeeman --cluster FILE --fields GRID) --out FILE.png|FILE.svg
//	frustum demo
//	frustum version
//	frustum help [COMMAND]
//
// The three tasks also take --json (the protojson of the result message on
// standard output and nothing else there), --csv (a header row with units,
// then one row per point) and --max-memory SIZE (such as 512MiB or 4GiB; the
// engine refuses a task that would need more). Without --json or --csv they
// print an aligned table with the unit in every column header, followed by a
// few lines on what the engine did.
//
// With --server HOST:PORT (and --token-file FILE, --tls-ca FILE where the
// server needs them) a task runs as a job on frustumd, the job service, and
// prints exactly what the in-process run prints. The job commands (submit,
// jobs, job, watch, cancel, delete) talk to frustumd at --server, else at
// $FRUSTUM_SERVER, else at 127.0.0.1:7447; the token file defaults to
// $FRUSTUM_TOKEN_FILE. An error of the server is one line on stderr naming
// the gRPC status code, such as NOT_FOUND, and exits with status 1.
//
// A cluster FILE is the protojson form of the Cluster message; see testdata/
// for examples. Units: energies and temperatures in K, fields in T, moments
// in mu_B per cluster.
//
// A GRID is a single number (5), a list (1,2,5), a linear range with both
// ends included (0:15:61 is 61 points from 0 to 15) or a logarithmic range
// (log:0.5:300:100). Vectors are three numbers: --field -1,0,0.
//
// Flags follow the rules of Go's flag package: -flag and --flag are the same,
// a value may follow as the next argument or after =, and the commands take
// no positional arguments.
//
// Progress and warnings go to standard error. Exit status: 0 on success, 2
// for a usage error (unknown command or flag, bad grid, bad parameter value),
// 1 for any other failure (unreadable or invalid cluster file, task too
// large, numerical failure, interrupt).
//
// Example:
//
//	frustum magnetization --cluster testdata/demo-multimer.json --temps 2,5,10 --fields 0:15:61 --csv
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	code := runContext(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run runs the command line args (without the program name), writing to
// stdout and stderr, and returns the exit status.
func run(args []string, stdout, stderr io.Writer) int {
	return runContext(context.Background(), args, stdout, stderr)
}

// command is one subcommand of frustum.
type command struct {
	name    string
	summary string
	run     func(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error
}

func commands() []*command {
	return []*command{
		{name: "spectrum", summary: "energy levels at one field", run: runTask(spectrumTask)},
		{name: "thermo", summary: "energy, specific heat, entropy, magnetization and susceptibility against temperature", run: runTask(thermoTask)},
		{name: "magnetization", summary: "magnetization curves M(B), total and per site group, at several temperatures", run: runTask(magnetizationTask)},
		{name: "fit", summary: "fit cluster models and free-spin baselines to measured data y(B, T) and compare them", run: runTask(fitTask)},
		{name: "submit", summary: "start a task as a job on frustumd and print its name", run: runSubmit},
		{name: "jobs", summary: "list your jobs on frustumd", run: runJobs},
		{name: "job", summary: "show one job", run: runJob},
		{name: "watch", summary: "follow a job's progress until it ends", run: runWatch},
		{name: "cancel", summary: "cancel a queued or running job", run: runCancel},
		{name: "delete", summary: "delete a job that has ended, and its result", run: runDelete},
		{name: "plot", summary: "draw a result as a PNG or SVG figure, or the Zeeman level diagram of a cluster", run: runPlot},
		{name: "demo", summary: "the defect-multimer scenario of an invented compound", run: runDemo},
		{name: "version", summary: "the program version and the dense eigensolver backend", run: runVersion},
	}
}

func findCommand(name string) *command {
	for _, c := range commands() {
		if c.name == name {
			return c
		}
	}
	return nil
}

// Exit statuses.
const (
	exitOK      = 0
	exitFailure = 1
	exitUsage   = 2
)

func runContext(ctx context.Context, args []string, stdout, stderr io.Writer) (code int) {
	defer func() {
		if r := recover(); r != nil {
			fmt.Fprintf(stderr, "frustum: internal error: %s\n", oneLine(fmt.Sprint(r)))
			code = exitFailure
		}
	}()
	if len(args) == 0 {
		mainUsage(stderr)
		return exitUsage
	}
	name, rest := args[0], args[1:]
	switch name {
	case "-h", "-help", "--help", "help":
		if name == "help" && len(rest) > 0 {
			cmd := findCommand(rest[0])
			if cmd == nil {
				fmt.Fprintf(stderr, "frustum help: unknown command %q (commands: %s)\n", rest[0], commandNames())
				return exitUsage
			}
			return runCommand(ctx, cmd, []string{"--help"}, stdout, stderr)
		}
		mainUsage(stdout)
		return exitOK
	case "-version", "--version":
		name = "version"
	}
	cmd := findCommand(name)
	if cmd == nil {
		if strings.HasPrefix(name, "-") {
			fmt.Fprintf(stderr, "frustum: give a command before the flag %s (commands: %s)\n", name, commandNames())
		} else {
			fmt.Fprintf(stderr, "frustum: unknown command %q (commands: %s; see frustum help)\n", name, commandNames())
		}
		return exitUsage
	}
	return runCommand(ctx, cmd, rest, stdout, stderr)
}

func runCommand(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) int {
	err := cmd.run(ctx, cmd, args, stdout, stderr)
	if err == nil {
		return exitOK
	}
	if errors.Is(err, errHelpShown) {
		return exitOK
	}
	msg, code := describe(err)
	msg = oneLine(msg)
	if code == exitUsage {
		msg += fmt.Sprintf(" (see frustum %s --help)", cmd.name)
	}
	fmt.Fprintf(stderr, "frustum %s: %s\n", cmd.name, msg)
	return code
}

func commandNames() string {
	var names []string
	for _, c := range commands() {
		names = append(names, c.name)
	}
	return strings.Join(names, ", ")
}

func mainUsage(w io.Writer) {
	fmt.Fprint(w, `Usage: frustum COMMAND [flags]

Exact diagonalization of small quantum spin clusters: spectra,
thermodynamics and magnetization curves. Energies and temperatures in K,
fields in T, moments in mu_B per cluster.

Commands:
`)
	for _, c := range commands() {
		fmt.Fprintf(w, "  %-14s %s\n", c.name, c.summary)
	}
	fmt.Fprint(w, `
Run "frustum COMMAND --help" for the flags of a command.

The task commands run in-process, or as a job on frustumd with --server
HOST:PORT; the job commands talk to frustumd (default 127.0.0.1:7447).

Example:
  frustum demo
  frustum spectrum --cluster testdata/dimer.json --field 0,0,5
`)
}

// oneLine folds a message onto one line.
func oneLine(s string) string {
	s = strings.TrimSpace(s)
	return strings.Join(strings.FieldsFunc(s, func(r rune) bool { return r == '\n' || r == '\r' }), "; ")
}

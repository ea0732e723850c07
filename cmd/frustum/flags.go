package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"regexp"
	"strconv"
	"strings"

	"frustum/ed"
	"frustum/grid"
	"frustum/tasks"
)

// errHelpShown ends a command whose --help was printed.
var errHelpShown = errors.New("help shown")

// usageError is a mistake on the command line; it exits with status 2.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, args ...any) error {
	return &usageError{msg: fmt.Sprintf(format, args...)}
}

// flagSet is one command's flags with the text of its --help.
type flagSet struct {
	*flag.FlagSet
	cmd      *command
	synopsis string   // the usage line after "frustum NAME "
	about    string   // a paragraph on what the command does
	example  string   // one or more example command lines
	order    []string // flag names in the order of the help text
}

func newFlagSet(cmd *command, synopsis, about, example string) *flagSet {
	fs := flag.NewFlagSet("frustum "+cmd.name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	return &flagSet{FlagSet: fs, cmd: cmd, synopsis: synopsis, about: about, example: example}
}

func (fs *flagSet) add(name string) { fs.order = append(fs.order, name) }

func (fs *flagSet) stringFlag(p *string, name, usage string) {
	fs.StringVar(p, name, "", usage)
	fs.add(name)
}

func (fs *flagSet) boolFlag(p *bool, name, usage string) {
	fs.BoolVar(p, name, false, usage)
	fs.add(name)
}

func (fs *flagSet) funcFlag(name, usage string, f func(string) error) {
	fs.Func(name, usage, f)
	fs.add(name)
}

// parse parses args; it prints the help and returns errHelpShown for -h or
// --help, and returns a usageError for anything wrong.
func (fs *flagSet) parse(args []string, stdout io.Writer) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fs.help(stdout)
			return errHelpShown
		}
		return &usageError{msg: flagMessage(err)}
	}
	if fs.NArg() > 0 {
		arg := fs.Arg(0)
		if strings.HasSuffix(strings.ToLower(arg), ".json") {
			return usagef("unexpected argument %q: give the cluster file as --cluster %s", arg, arg)
		}
		return usagef("unexpected argument %q: this command takes flags only", arg)
	}
	return nil
}

var (
	reUndefined = regexp.MustCompile(`^flag provided but not defined: -+(.*)$`)
	reNeedsArg  = regexp.MustCompile(`^flag needs an argument: -+(.*)$`)
	reInvalid   = regexp.MustCompile(`^invalid (?:boolean )?value (".*") for (?:flag )?-+([^:]*): (.*)$`)
)

// flagMessage rewrites the flag package's errors to name flags as --name.
func flagMessage(err error) string {
	msg := err.Error()
	if m := reUndefined.FindStringSubmatch(msg); m != nil {
		return fmt.Sprintf("unknown flag --%s", m[1])
	}
	if m := reNeedsArg.FindStringSubmatch(msg); m != nil {
		return fmt.Sprintf("flag --%s needs a value", m[1])
	}
	if m := reInvalid.FindStringSubmatch(msg); m != nil {
		if m[3] == "parse error" {
			return fmt.Sprintf("--%s %s: not a valid value", m[2], m[1])
		}
		return fmt.Sprintf("--%s %s", m[2], m[3])
	}
	return msg
}

// help prints the usage line, the description, the flags and an example.
func (fs *flagSet) help(w io.Writer) {
	fmt.Fprintf(w, "Usage: frustum %s %s\n\n", fs.cmd.name, fs.synopsis)
	fmt.Fprintf(w, "%s\n", strings.TrimSpace(fs.about))
	if len(fs.order) > 0 {
		fmt.Fprintf(w, "\nFlags:\n")
		type row struct{ left, usage string }
		var rows []row
		width := 0
		for _, name := range fs.order {
			f := fs.Lookup(name)
			placeholder, usage := flag.UnquoteUsage(f)
			if _, isBool := f.Value.(interface{ IsBoolFlag() bool }); isBool {
				placeholder = ""
			} else if placeholder == "value" {
				placeholder = "VALUE"
			}
			left := "--" + name
			if placeholder != "" {
				left += " " + placeholder
			}
			width = max(width, len(left))
			rows = append(rows, row{left, usage})
		}
		for _, r := range rows {
			fmt.Fprintf(w, "  %-*s  %s\n", width, r.left, r.usage)
		}
		fmt.Fprintf(w, "  %-*s  %s\n", width, "--help", "print this help")
	}
	fmt.Fprintf(w, "\nExample:\n")
	for _, line := range strings.Split(strings.TrimSpace(fs.example), "\n") {
		fmt.Fprintf(w, "  %s\n", strings.TrimSpace(line))
	}
}

// parseOperands parses args, whose flags may come before, between and after
// the operands (the arguments that are not flags; all of them after "--"),
// and returns the operands. It refuses fewer than least or more than most
// of them, naming them as what (such as "job ID").
func (fs *flagSet) parseOperands(args []string, stdout io.Writer, what string, least, most int) ([]string, error) {
	var operands []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				fs.help(stdout)
				return nil, errHelpShown
			}
			return nil, &usageError{msg: flagMessage(err)}
		}
		rest := fs.Args()
		if len(rest) == 0 {
			break
		}
		if consumed := len(args) - len(rest); consumed > 0 && args[consumed-1] == "--" {
			operands = append(operands, rest...)
			break
		}
		operands = append(operands, rest[0])
		args = rest[1:]
	}
	switch {
	case len(operands) < least:
		return nil, usagef("give the %s", what)
	case len(operands) > most:
		return nil, usagef("unexpected argument %q: give one %s", operands[most], what)
	}
	return operands, nil
}

// vectorFlag parses a vector flag into *p and records that it was given.
func vectorFlag(name string, p *[3]float64, given *bool, nonZero bool) func(string) error {
	return func(s string) error {
		v, err := grid.ParseVector(s)
		if err != nil {
			return err
		}
		if nonZero && v == [3]float64{} {
			return fmt.Errorf("%q: the zero vector has no direction", s)
		}
		*p, *given = v, true
		return nil
	}
}

// gridFlag parses a grid flag into *p.
func gridFlag(p *[]float64) func(string) error {
	return func(s string) error {
		v, err := grid.Parse(s)
		if err != nil {
			return err
		}
		*p = v
		return nil
	}
}

// levelsFlag parses a count K >= 0 into *p.
func levelsFlag(p *int) func(string) error {
	return func(s string) error {
		n, err := strconv.ParseInt(strings.TrimSpace(s), 10, 32)
		if err != nil {
			if ne, ok := err.(*strconv.NumError); ok && ne.Err == strconv.ErrRange {
				return fmt.Errorf("%q is too large", s)
			}
			return fmt.Errorf("%q is not a whole number", s)
		}
		if n < 0 {
			return fmt.Errorf("%q is negative; give the number of lowest energies wanted, or 0 for all", s)
		}
		*p = int(n)
		return nil
	}
}

// memoryFlag parses a size such as 512MiB, 4GiB, 2GB or 1000000 (bytes).
func memoryFlag(p *int64) func(string) error {
	return func(s string) error {
		n, err := parseSize(s)
		if err != nil {
			return err
		}
		*p = n
		return nil
	}
}

var sizeUnits = map[string]float64{
	"": 1, "b": 1,
	"kib": 1 << 10, "mib": 1 << 20, "gib": 1 << 30, "tib": 1 << 40,
	"kb": 1e3, "mb": 1e6, "gb": 1e9, "tb": 1e12,
}

var reSize = regexp.MustCompile(`^([0-9]+(?:\.[0-9]*)?|\.[0-9]+)\s*([A-Za-z]*)$`)

func parseSize(s string) (int64, error) {
	m := reSize.FindStringSubmatch(strings.TrimSpace(s))
	if m == nil {
		return 0, fmt.Errorf("%q is not a size: write a number with a unit, such as 512MiB or 4GiB", s)
	}
	unit, ok := sizeUnits[strings.ToLower(m[2])]
	if !ok {
		return 0, fmt.Errorf("%q: unknown unit %q (use B, KiB, MiB, GiB, TiB, or KB, MB, GB, TB)", s, m[2])
	}
	v, err := strconv.ParseFloat(m[1], 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not a size", s)
	}
	b := v * unit
	if b < 1 {
		return 0, fmt.Errorf("%q: the memory limit must be at least 1 byte", s)
	}
	if b >= math.MaxInt64 {
		return 0, fmt.Errorf("%q is too large", s)
	}
	return int64(b), nil
}

// outputFlags are --json, --csv and --max-memory, shared by the tasks.
type outputFlags struct {
	json, csv bool
	maxMemory int64
}

func (o *outputFlags) register(fs *flagSet) {
	fs.boolFlag(&o.json, "json", "print the protojson of the result message on stdout, nothing else")
	fs.boolFlag(&o.csv, "csv", "print CSV: a header row with units, then one row per point")
	fs.funcFlag("max-memory", "refuse tasks that need more memory than `SIZE` (such as 512MiB, 4GiB; default 4GiB)", memoryFlag(&o.maxMemory))
}

func (o *outputFlags) check() error {
	if o.json && o.csv {
		return usagef("--json and --csv exclude each other: choose one")
	}
	return nil
}

func (o *outputFlags) options(stderr io.Writer) ed.Options {
	return ed.Options{Limits: ed.Limits{MaxMemory: o.maxMemory}, Progress: progressTo(stderr)}
}

// requestFlags maps the field names of task requests to their flags.
var requestFlags = map[string]string{
	"field":        "--field",
	"levels":       "--levels",
	"temperatures": "--temps",
	"fields":       "--fields",
	"direction":    "--direction",
	"powder":       "--powder",
	"method":       "--method",
	"correlations": "--correlations",
	"lanczos.tol":  "--tol",
	"ftlm.vectors": "--vectors",
	"ftlm.steps":   "--steps",
	"sectors":      "--sector",
	// The fit's parameters.
	"data":            "--data",
	"observable":      "--observable",
	"vary":            "--vary",
	"link":            "--link",
	"scaling_g":       "--scaling-g",
	"max_evaluations": "--max-evaluations",
}

// describe turns an error into the message of the one line on stderr and the
// exit status.
func describe(err error) (string, int) {
	var ue *usageError
	var re *ed.RequestError
	var pe *tasks.ParameterError
	var le *ed.LimitError
	var se *serverError
	switch {
	case errors.As(err, &ue):
		return ue.msg, exitUsage
	case errors.As(err, &se):
		return describeRemote(se), exitFailure
	case errors.As(err, &re):
		return requestMessage(re.Field, re.Reason)
	case errors.As(err, &pe):
		return requestMessage(pe.Field, pe.Reason)
	case errors.As(err, &le):
		return err.Error() + " (--max-memory sets the limit)", exitFailure
	case errors.Is(err, context.Canceled):
		return "interrupted", exitFailure
	}
	return err.Error(), exitFailure
}

func requestMessage(field, reason string) (string, int) {
	base, _, _ := strings.Cut(field, "[")
	if f, ok := requestFlags[base]; ok {
		if base == field {
			return fmt.Sprintf("%s: %s", f, reason), exitUsage
		}
		return fmt.Sprintf("%s: %s: %s", f, field, reason), exitUsage
	}
	return fmt.Sprintf("%s: %s", field, reason), exitFailure
}

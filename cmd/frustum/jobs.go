package main

import (
	"context"
	"fmt"
	"io"
	"strings"
	"time"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"frustum/client"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// serverSynopsis ends the usage line of every job command.
const serverSynopsis = "[--server HOST:PORT] [--token-file FILE] [--tls-ca FILE]"

// serverAbout ends the help of every job command.
const serverAbout = `

The job commands talk to a running frustumd (see frustumd --help): the one
at --server, else at $` + envServer + `, else at ` + defaultServer + `. On an
address other than loopback it takes TLS (--tls-ca, the CA that signed the
server's certificate) and your token (--token-file, else $` + envTokenFile + `).
A job ID is the name that submit prints, "jobs/ID", or the ID alone.`

// jobOperand returns the job name of the ID operand.
func jobOperand(fs *flagSet, args []string, stdout io.Writer) (string, error) {
	ops, err := fs.parseOperands(args, stdout, "job ID", 1, 1)
	if err != nil {
		return "", err
	}
	name := client.JobName(ops[0])
	if name == "" || name == "jobs/" {
		return "", usagef("give the job ID")
	}
	return name, nil
}

func runSubmit(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	var taskNames []string
	for _, t := range tasksList() {
		taskNames = append(taskNames, t.name)
	}
	names := strings.Join(taskNames, ", ")
	if len(args) == 0 {
		return usagef("give the task: frustum submit TASK [its flags], TASK one of %s", names)
	}
	var remote remoteFlags
	var requestID string
	flags := func(fs *flagSet) {
		fs.stringFlag(&requestID, "request-id", "an `ID` of yours that makes a repeated submit return the first job instead of a second one")
		remote.register(fs, true)
	}
	switch args[0] {
	case "-h", "-help", "--help":
		fs := newFlagSet(cmd, "TASK [the task's flags] [--request-id ID] "+serverSynopsis,
			`Submits a task as a job to frustumd and prints the job's name, "jobs/ID",
alone on stdout, at once: the job runs on the server, and "frustum watch",
"frustum job" and "frustum cancel" follow it. TASK is one of `+names+`;
it takes the flags of its own command (see "frustum submit TASK --help"),
without --json, --csv and --max-memory.`+serverAbout,
			`frustum submit magnetization --cluster testdata/demo-multimer.json --temps 2,5,10 --fields 0:15:61
job=$(frustum submit thermo --cluster testdata/dimer.json --temps log:0.5:300:100) && frustum watch $job`)
		flags(fs)
		fs.help(stdout)
		return errHelpShown
	}
	t := findTask(args[0])
	if t == nil {
		if strings.HasPrefix(args[0], "-") {
			return usagef("give the task before the flag %s: frustum submit TASK [its flags], TASK one of %s", args[0], names)
		}
		return usagef("unknown task %q (tasks: %s)", args[0], names)
	}
	sub := &command{name: "submit " + t.name}
	fs := newFlagSet(sub, t.synopsis+" [--request-id ID] "+serverSynopsis,
		`Submits the `+t.name+` task as a job to frustumd and prints the job's name
alone on stdout, at once. The flags are those of "frustum `+t.name+`":

`+t.about+serverAbout,
		"frustum submit "+strings.TrimPrefix(strings.SplitN(t.example, "\n", 2)[0], "frustum "))
	build := t.flags(fs)
	flags(fs)
	if err := fs.parse(args[1:], stdout); err != nil {
		return err
	}
	if err := remote.check(); err != nil {
		return err
	}
	spec, err := build()
	if err != nil {
		return err
	}
	c, err := remote.dial(ctx)
	if err != nil {
		return err
	}
	defer c.Close()
	job, err := c.Create(ctx, spec, requestID)
	if err != nil {
		return remote.wrap(err)
	}
	_, err = fmt.Fprintln(stdout, job.GetName())
	return err
}

// stateNames are the states that --state takes.
var stateNames = []string{"queued", "running", "succeeded", "failed", "cancelled"}

func parseState(s string) (frustumv1.Job_State, error) {
	if s == "" {
		return frustumv1.Job_STATE_UNSPECIFIED, nil
	}
	name := strings.ToUpper(strings.TrimSpace(s))
	if name == "CANCELED" {
		name = "CANCELLED"
	}
	if v, ok := frustumv1.Job_State_value[name]; ok && v != 0 {
		return frustumv1.Job_State(v), nil
	}
	return 0, usagef("--state %q: give one of %s", s, strings.Join(stateNames, ", "))
}

func runJobs(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "[--state STATE] [--json] "+serverSynopsis,
		`Lists your jobs, newest first: the id, the task, the state, when it was
created, the owner, and its progress (the error code of a failed job). With
--json it prints the protojson of a ListJobsResponse holding every job.`+serverAbout,
		`frustum jobs
frustum jobs --state running --server 127.0.0.1:7447`)
	var (
		stateName string
		asJSON    bool
		remote    remoteFlags
	)
	fs.stringFlag(&stateName, "state", "only the jobs in `STATE`: "+strings.Join(stateNames, ", "))
	fs.boolFlag(&asJSON, "json", "print the protojson of a ListJobsResponse, nothing else")
	remote.register(fs, true)
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	state, err := parseState(stateName)
	if err != nil {
		return err
	}
	c, err := remote.connect(ctx)
	if err != nil {
		return err
	}
	defer c.Close()
	jobs, err := c.ListAll(ctx, state)
	if err != nil {
		return remote.wrap(err)
	}
	if asJSON {
		b, err := tasks.MarshalJSON(&frustumv1.ListJobsResponse{Jobs: jobs})
		if err != nil {
			return err
		}
		_, err = stdout.Write(b)
		return err
	}
	t := &table{header: []string{"ID", "TASK", "STATE", "CREATED", "OWNER", "PROGRESS"}, left: true}
	for _, j := range jobs {
		t.add(client.JobID(j.GetName()), dash(j.GetTask()), j.GetState().String(), timeCell(j.GetCreateTime()), dash(j.GetOwner()), progressCell(j))
	}
	return t.write(stdout)
}

func dash(s string) string {
	if s == "" {
		return "-"
	}
	return oneLine(s)
}

// timeCell is a timestamp in local time to the second, or "-".
func timeCell(ts *timestamppb.Timestamp) string {
	if ts == nil {
		return "-"
	}
	return ts.AsTime().Local().Format("2006-01-02 15:04:05")
}

// progressCell is the progress column of frustum jobs.
func progressCell(j *frustumv1.Job) string {
	p := j.GetProgress()
	switch j.GetState() {
	case frustumv1.Job_SUCCEEDED:
		if j.GetFromCache() {
			return "done (cached)"
		}
		return "done"
	case frustumv1.Job_FAILED:
		return dash(j.GetError().GetCode())
	case frustumv1.Job_CANCELLED:
		return "-"
	}
	if p == nil {
		return "-"
	}
	s := fmt.Sprintf("%.0f%%", 100*p.GetFraction())
	if p.GetStage() != "" {
		s += " " + oneLine(p.GetStage())
	}
	if e := eta(p); e != "-" {
		s += ", eta " + e
	}
	return s
}

func runJob(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "ID [--json] "+serverSynopsis,
		`Prints a job: its task and state, owner, times, progress, the engine's
plan, the error of a failed job, and whether and how large its result is.
With --json it prints the protojson of the Job message, whose "state" names
the state (such as "SUCCEEDED"), with the result when it travels inline; the
task commands with --server print results.`+serverAbout,
		`frustum job 7f3a9c
frustum job jobs/7f3a9c --json`)
	var (
		asJSON bool
		remote remoteFlags
	)
	fs.boolFlag(&asJSON, "json", "print the protojson of the Job message, nothing else")
	remote.register(fs, true)
	name, err := jobOperand(fs, args, stdout)
	if err != nil {
		return err
	}
	c, err := remote.connect(ctx)
	if err != nil {
		return err
	}
	defer c.Close()
	job, err := c.Get(ctx, name)
	if err != nil {
		return remote.wrap(err)
	}
	if asJSON {
		b, err := tasks.MarshalJSON(job)
		if err != nil {
			return err
		}
		_, err = stdout.Write(b)
		return err
	}
	return jobDetails(stdout, job)
}

// jobDetails prints a job for people.
func jobDetails(w io.Writer, j *frustumv1.Job) error {
	type row struct{ key, value string }
	rows := []row{
		{"Job", j.GetName()},
		{"Task", dash(j.GetTask())},
		{"State", j.GetState().String()},
		{"Owner", dash(j.GetOwner())},
		{"Created", timeCell(j.GetCreateTime())},
	}
	if j.GetStartTime() != nil {
		rows = append(rows, row{"Started", timeCell(j.GetStartTime())})
	}
	if j.GetEndTime() != nil {
		rows = append(rows, row{"Ended", timeCell(j.GetEndTime())})
	}
	if j.GetStartTime() != nil && j.GetEndTime() != nil {
		d := j.GetEndTime().AsTime().Sub(j.GetStartTime().AsTime())
		rows = append(rows, row{"Ran for", d.Round(time.Millisecond).String()})
	}
	if !client.Terminal(j.GetState()) && j.GetProgress() != nil {
		rows = append(rows, row{"Progress", progressLine(j)})
	}
	if j.GetAttempts() > 1 {
		rows = append(rows, row{"Attempts", fmt.Sprint(j.GetAttempts())})
	}
	if s := j.GetSpec(); s != nil {
		c := s.GetCluster()
		rows = append(rows, row{"Cluster", fmt.Sprintf("%q, %d sites, %d bonds", c.GetName(), len(c.GetSites()), len(c.GetBonds()))})
		if p := taskParameters(s); p != nil {
			rows = append(rows, row{"Parameters", parameterSummary(p)})
		}
	}
	if j.GetRequestId() != "" {
		rows = append(rows, row{"Request id", j.GetRequestId()})
	}
	if j.GetFromCache() {
		rows = append(rows, row{"From cache", "the result of " + dash(j.GetCachedFrom())})
	}
	if j.GetState() == frustumv1.Job_SUCCEEDED {
		where := "inline"
		if client.InlineResult(j) == nil {
			where = "fetched in chunks (the task command with --server prints it)"
		}
		rows = append(rows, row{"Result", fmt.Sprintf("%s, %s", ed.FormatBytes(j.GetResultSizeBytes()), where)})
	}
	if e := j.GetError(); e != nil {
		rows = append(rows, row{"Error", oneLine(strings.TrimPrefix(e.GetCode()+": "+e.GetMessage(), ": "))})
		for _, f := range e.GetFieldViolations() {
			rows = append(rows, row{"", oneLine(f.GetField() + ": " + f.GetDescription())})
		}
	}
	width := 0
	for _, r := range rows {
		width = max(width, len(r.key))
	}
	for _, r := range rows {
		key := r.key
		if key != "" {
			key += ":"
		}
		if _, err := fmt.Fprintf(w, "%-*s %s\n", width+1, key, r.value); err != nil {
			return err
		}
	}
	if j.GetPlan() != nil {
		return report(w, j.GetPlan())
	}
	return nil
}

// parameterSummary prints the set fields of a parameters message on one
// line by their JSON names, long lists shortened to their ends and length:
// temperatures=[0.5 ... 300] (100 values) field=[0 0 1].
func parameterSummary(m proto.Message) string {
	var parts []string
	r := m.ProtoReflect()
	fields := r.Descriptor().Fields()
	for i := range fields.Len() {
		fd := fields.Get(i)
		if !r.Has(fd) {
			continue
		}
		v := r.Get(fd)
		var text string
		if fd.IsList() {
			l := v.List()
			var items []string
			for k := range l.Len() {
				items = append(items, fmt.Sprint(l.Get(k).Interface()))
			}
			if len(items) > 6 {
				text = fmt.Sprintf("[%s ... %s] (%d values)", items[0], items[len(items)-1], len(items))
			} else {
				text = "[" + strings.Join(items, " ") + "]"
			}
		} else {
			text = fmt.Sprint(v.Interface())
		}
		parts = append(parts, fd.JSONName()+"="+text)
	}
	if len(parts) == 0 {
		return "defaults"
	}
	return strings.Join(parts, " ")
}

// taskParameters returns the parameters message of the spec's task.
func taskParameters(s *frustumv1.JobSpec) proto.Message {
	switch {
	case s.GetSpectrum() != nil:
		return s.GetSpectrum()
	case s.GetThermo() != nil:
		return s.GetThermo()
	case s.GetMagnetization() != nil:
		return s.GetMagnetization()
	}
	return nil
}

func runWatch(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "ID "+serverSynopsis,
		`Follows a job until it ends: on a terminal, a progress bar; otherwise one
line per change,

  STATE STAGE DONE/TOTAL FRACTION% eta ETA

("-" for a stage or an estimate not known). It rides out a restart of the
server. Exits with status 0 when the job succeeded and 1 otherwise (failed,
cancelled, or the server unreachable), with the reason on stderr.`+serverAbout,
		`frustum watch 7f3a9c
frustum watch "$(frustum submit spectrum --cluster testdata/dimer.json)"`)
	var remote remoteFlags
	remote.register(fs, true)
	name, err := jobOperand(fs, args, stdout)
	if err != nil {
		return err
	}
	c, err := remote.connect(ctx)
	if err != nil {
		return err
	}
	defer c.Close()
	draw := plainProgress(stdout)
	tty := terminal(stdout)
	if tty != nil {
		draw = barProgress(tty)
	}
	job, err := c.Watch(ctx, name, draw)
	if err != nil {
		if tty != nil {
			fmt.Fprintln(tty)
		}
		return remote.wrap(err)
	}
	if je := client.NewJobError(job); je != nil {
		return remote.wrap(je)
	}
	return nil
}

// plainProgress prints each change as one progressLine, without repeats.
func plainProgress(w io.Writer) func(*frustumv1.Job) {
	last := ""
	return func(j *frustumv1.Job) {
		line := progressLine(j)
		if line != last {
			fmt.Fprintln(w, line)
			last = line
		}
	}
}

// barWidth is the number of cells of the progress bar.
const barWidth = 30

// barProgress draws the job as a progress bar on one updating line of the
// terminal, ended with a newline when the job ends.
func barProgress(f io.Writer) func(*frustumv1.Job) {
	return func(j *frustumv1.Job) {
		p := j.GetProgress()
		frac := min(max(p.GetFraction(), 0), 1)
		if j.GetState() == frustumv1.Job_SUCCEEDED {
			frac = 1
		}
		full := int(frac*barWidth + 0.5)
		bar := strings.Repeat("#", full) + strings.Repeat(".", barWidth-full)
		line := fmt.Sprintf("%-9s [%s] %5.1f%%", j.GetState(), bar, 100*frac)
		if p.GetStage() != "" && !client.Terminal(j.GetState()) {
			line += fmt.Sprintf("  %s %d/%d", oneLine(p.GetStage()), p.GetDone(), p.GetTotal())
		}
		if e := eta(p); e != "-" && !client.Terminal(j.GetState()) {
			line += "  eta " + e
		}
		fmt.Fprintf(f, "\r\033[K%s", line)
		if client.Terminal(j.GetState()) {
			fmt.Fprintln(f)
		}
	}
}

func runCancel(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "ID "+serverSynopsis,
		`Cancels a queued or running job: the engine stops within a second and the
job ends CANCELLED. Prints the job's name and its state. Cancelling a job
that has ended is an error (FAILED_PRECONDITION).`+serverAbout,
		`frustum cancel 7f3a9c`)
	var remote remoteFlags
	remote.register(fs, true)
	name, err := jobOperand(fs, args, stdout)
	if err != nil {
		return err
	}
	c, err := remote.connect(ctx)
	if err != nil {
		return err
	}
	defer c.Close()
	job, err := c.Cancel(ctx, name)
	if err != nil {
		return remote.wrap(err)
	}
	_, err = fmt.Fprintf(stdout, "%s: %s\n", job.GetName(), job.GetState())
	return err
}

func runDelete(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "ID "+serverSynopsis,
		`Deletes a job that has ended, and its result, from the server. A queued or
running job must be cancelled first.`+serverAbout,
		`frustum delete 7f3a9c`)
	var remote remoteFlags
	remote.register(fs, true)
	name, err := jobOperand(fs, args, stdout)
	if err != nil {
		return err
	}
	c, err := remote.connect(ctx)
	if err != nil {
		return err
	}
	defer c.Close()
	if err := c.Delete(ctx, name); err != nil {
		return remote.wrap(err)
	}
	_, err = fmt.Fprintf(stdout, "%s: deleted\n", name)
	return err
}

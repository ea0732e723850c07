package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"strings"
	"sync"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"frustum/client"
	frustumv1 "frustum/proto/frustum/v1"
)

// The job commands' server, unless --server or $FRUSTUM_SERVER says
// otherwise: frustumd's default address.
const defaultServer = "127.0.0.1:7447"

// Environment variables of the job commands.
const (
	envServer    = "FRUSTUM_SERVER"
	envTokenFile = "FRUSTUM_TOKEN_FILE"
)

// remoteFlags are --server, --token-file and --tls-ca.
type remoteFlags struct {
	server, tokenFile, tlsCA string
	// jobs is true for the job commands, which always talk to a server.
	jobs bool
}

// register adds the flags. The job commands (jobs true) default to
// $FRUSTUM_SERVER or 127.0.0.1:7447; the task commands run in-process
// unless --server is given.
func (r *remoteFlags) register(fs *flagSet, jobs bool) {
	r.jobs = jobs
	if jobs {
		fs.stringFlag(&r.server, "server", "the frustumd at `HOST:PORT` (default $"+envServer+", or "+defaultServer+")")
	} else {
		fs.stringFlag(&r.server, "server", "run the task as a job on the frustumd at `HOST:PORT`")
	}
	fs.stringFlag(&r.tokenFile, "token-file", "read your token from the first line of `FILE` (default $"+envTokenFile+")")
	fs.stringFlag(&r.tlsCA, "tls-ca", "connect with TLS, trusting the CA certificates of the PEM `FILE`")
}

// check fills in the defaults after parsing and refuses a bad address.
func (r *remoteFlags) check() error {
	if r.jobs && r.server == "" {
		r.server = os.Getenv(envServer)
		if r.server == "" {
			r.server = defaultServer
		}
	}
	if r.server == "" {
		if r.tokenFile != "" || r.tlsCA != "" {
			return usagef("--token-file and --tls-ca need --server HOST:PORT")
		}
		return nil
	}
	if host, port, err := net.SplitHostPort(r.server); err != nil || host == "" || port == "" {
		return usagef("--server %q: give HOST:PORT, such as %s", r.server, defaultServer)
	}
	if r.tokenFile == "" {
		r.tokenFile = os.Getenv(envTokenFile)
	}
	return nil
}

// dial connects to the server.
func (r *remoteFlags) dial(ctx context.Context) (*client.Client, error) {
	var opts []client.Option
	if r.tokenFile != "" {
		opts = append(opts, client.WithTokenFile(r.tokenFile))
	}
	if r.tlsCA != "" {
		opts = append(opts, client.WithTLSCA(r.tlsCA))
	}
	c, err := client.Dial(ctx, r.server, opts...)
	if err != nil {
		return nil, errors.New(strings.TrimPrefix(err.Error(), "client: "))
	}
	return c, nil
}

// connect checks the flags (as check) and dials the server.
func (r *remoteFlags) connect(ctx context.Context) (*client.Client, error) {
	if err := r.check(); err != nil {
		return nil, err
	}
	return r.dial(ctx)
}

// run runs spec as a job on the server and returns its result, with a
// progress line on stderr when that is a terminal.
func (r *remoteFlags) run(ctx context.Context, spec *frustumv1.JobSpec, stderr io.Writer) (proto.Message, error) {
	c, err := r.dial(ctx)
	if err != nil {
		return nil, err
	}
	defer c.Close()
	progress, clear := jobProgressTo(stderr)
	res, err := c.Run(ctx, spec, "", progress)
	clear()
	if err != nil {
		return nil, r.wrap(err)
	}
	return res, nil
}

// wrap marks err as an error of the server at r.server.
func (r *remoteFlags) wrap(err error) error {
	if err == nil {
		return nil
	}
	return &serverError{addr: r.server, err: err}
}

// serverError is an error of a call to the server at addr.
type serverError struct {
	addr string
	err  error
}

func (e *serverError) Error() string { return e.err.Error() }
func (e *serverError) Unwrap() error { return e.err }

// describeRemote is the one line for an error of the server: the code and
// the message, with the field paths of INVALID_ARGUMENT.
func describeRemote(e *serverError) string {
	var je *client.JobError
	if errors.As(e.err, &je) {
		return je.Error()
	}
	for _, ce := range []error{context.Canceled, context.DeadlineExceeded} {
		if errors.Is(e.err, ce) {
			return "interrupted: " + strings.TrimSuffix(e.err.Error(), ": "+ce.Error())
		}
	}
	st, ok := status.FromError(e.err)
	if !ok {
		return e.err.Error()
	}
	if st.Code() == codes.Canceled && st.Message() == context.Canceled.Error() {
		return "interrupted"
	}
	msg := client.CodeName(st.Code()) + ": " + st.Message()
	if fields := client.FieldViolations(e.err); len(fields) > 0 && st.Code() == codes.InvalidArgument {
		var paths []string
		for _, f := range fields {
			if !strings.Contains(msg, f.Field) {
				paths = append(paths, f.Field)
			}
		}
		if len(paths) > 0 {
			msg += " (fields: " + strings.Join(paths, ", ") + ")"
		}
	}
	switch st.Code() {
	case codes.Unavailable:
		msg += fmt.Sprintf(" (is frustumd running at %s?)", e.addr)
	case codes.Unauthenticated:
		msg += " (give your token with --token-file FILE or $" + envTokenFile + ")"
	}
	return msg
}

// terminal returns w as a file when it is a terminal, and nil otherwise.
func terminal(w io.Writer) *os.File {
	f, ok := w.(*os.File)
	if !ok {
		return nil
	}
	st, err := f.Stat()
	if err != nil || st.Mode()&os.ModeCharDevice == 0 {
		return nil
	}
	return f
}

// jobProgressTo returns a callback that draws the job's state and progress
// on one updating line of stderr when it is a terminal (nil otherwise), and
// the function that clears that line.
func jobProgressTo(stderr io.Writer) (progress func(*frustumv1.Job), clear func()) {
	f := terminal(stderr)
	if f == nil {
		return nil, func() {}
	}
	var (
		mu    sync.Mutex
		last  time.Time
		state frustumv1.Job_State
		drawn bool
	)
	clear = func() {
		mu.Lock()
		defer mu.Unlock()
		if drawn {
			fmt.Fprint(f, "\r\033[K")
			drawn = false
		}
	}
	progress = func(j *frustumv1.Job) {
		if client.Terminal(j.GetState()) {
			clear()
			return
		}
		mu.Lock()
		defer mu.Unlock()
		now := time.Now()
		if j.GetState() == state && now.Sub(last) < 200*time.Millisecond {
			return
		}
		state, last, drawn = j.GetState(), now, true
		fmt.Fprintf(f, "\r\033[K%s %s", j.GetName(), progressLine(j))
	}
	return progress, clear
}

// progressLine is "STATE stage done/total fraction% eta ETA", with "-" for
// a stage or an estimate that is not known.
func progressLine(j *frustumv1.Job) string {
	p := j.GetProgress()
	stage := p.GetStage()
	if stage == "" {
		stage = "-"
	}
	return fmt.Sprintf("%s %s %d/%d %.1f%% eta %s", j.GetState(), oneLine(stage), p.GetDone(), p.GetTotal(), 100*p.GetFraction(), eta(p))
}

// eta is the estimate of time left, such as 42s or 3m5s, or "-".
func eta(p *frustumv1.JobProgress) string {
	if p == nil || p.SecondsLeft == nil || p.GetSecondsLeft() < 0 {
		return "-"
	}
	return (time.Duration(p.GetSecondsLeft() * float64(time.Second))).Round(time.Second).String()
}

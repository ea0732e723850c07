package main

import (
	"bufio"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"math"
	"os"
	"os/signal"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"syscall"
	"time"

	"frustum/server"
)

const usage = `usage: frustumd [flags]
       frustumd hash-token < TOKEN

frustumd serves Frustum's JobService over gRPC, with health checks and
server reflection. Jobs are kept in DIR/jobs.db across restarts.

Flags:
`

const example = `
On an address that is not loopback, TLS and a token file are required.
The token file has one line per user: NAME SHA256HEX, the hex SHA-256 of
the user's token, as printed by "frustumd hash-token".

Example:
  frustumd --listen 127.0.0.1:7447 --data /var/lib/frustum --workers 2 --max-memory 8GiB
  echo "usera $(frustumd hash-token < usera.token)" >> tokens
  frustumd --listen 0.0.0.0:7447 --tls-cert cert.pem --tls-key key.pem --tokens tokens
`

// run runs frustumd with the command line args (without the program name)
// and returns the exit status: 0 after a clean stop, 2 for a usage error,
// 1 for any other failure.
func run(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	if len(args) > 0 && args[0] == "hash-token" {
		return hashToken(args[1:], stdin, stdout, stderr)
	}
	cfg, code, err := parseFlags(args, stderr)
	if err != nil {
		if code != 0 {
			fmt.Fprintln(stderr, "frustumd:", err)
		}
		return code
	}
	log := slog.New(slog.NewTextHandler(stderr, nil))
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGTERM, os.Interrupt)
	defer stop()
	if err := serve(ctx, cfg, log); err != nil {
		log.Error(err.Error())
		return 1
	}
	return 0
}

// serve runs the server until ctx ends, then shuts it down.
func serve(ctx context.Context, cfg server.Config, log *slog.Logger) error {
	srv, err := server.New(cfg, log)
	if err != nil {
		return err
	}
	serveErr := make(chan error, 1)
	go func() { serveErr <- srv.Serve(nil) }()
	select {
	case err = <-serveErr:
		// Serve failed (the address is taken, say): stop what New started.
		srv.Shutdown(context.Background())
		return err
	case <-ctx.Done():
	}
	log.Info("signal received: stopping (a second signal ends the process at once)")
	grace := cfg.Grace
	if grace <= 0 {
		grace = server.DefaultGrace
	}
	// The grace period, then time to cancel and requeue and to stop.
	sctx, cancel := context.WithTimeout(context.Background(), grace+15*time.Second)
	defer cancel()
	stopSignals := make(chan os.Signal, 1)
	signal.Notify(stopSignals, syscall.SIGTERM, os.Interrupt)
	go func() {
		<-stopSignals
		log.Error("second signal: exiting at once")
		os.Exit(1)
	}()
	if err := srv.Shutdown(sctx); err != nil {
		return err
	}
	if err := <-serveErr; err != nil {
		return err
	}
	return nil
}

// parseFlags returns the configuration of the command line; code is the
// exit status when the command line does not start a server (0 for --help).
func parseFlags(args []string, stderr io.Writer) (server.Config, int, error) {
	var cfg server.Config
	fs := flag.NewFlagSet("frustumd", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprint(stderr, usage)
		fs.PrintDefaults()
		fmt.Fprint(stderr, example)
	}
	var maxMemory, maxRequest sizeFlag
	fs.StringVar(&cfg.Listen, "listen", server.DefaultListen, "listen on `HOST:PORT`")
	fs.StringVar(&cfg.DataDir, "data", defaultDataDir(), "keep the job database in `DIR`")
	fs.IntVar(&cfg.Workers, "workers", 0, "run at most `N` jobs at once (default: the number of cores)")
	fs.Var(&maxMemory, "max-memory", "let the running jobs' memory estimates add up to `SIZE`, such as 8GiB (default: half the machine's memory)")
	fs.DurationVar(&cfg.Grace, "grace", server.DefaultGrace, "on SIGTERM, let running jobs finish for `DUR` before queueing them again")
	fs.DurationVar(&cfg.Retention, "retention", 0, "delete finished jobs older than `DUR`, such as 720h (default: keep until deleted)")
	fs.StringVar(&cfg.TLSCert, "tls-cert", "", "serve TLS with the PEM certificate `FILE`")
	fs.StringVar(&cfg.TLSKey, "tls-key", "", "the PEM key `FILE` of --tls-cert")
	fs.StringVar(&cfg.TokenFile, "tokens", "", "authenticate users with the token `FILE` (lines NAME SHA256HEX)")
	fs.Var(&maxRequest, "max-request", "refuse request messages larger than `SIZE` (default 4MiB)")
	fs.IntVar(&cfg.MaxSites, "max-sites", server.DefaultMaxSites, "refuse clusters of more than `N` sites")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return cfg, 0, err
		}
		return cfg, 2, errors.New("see frustumd --help")
	}
	if fs.NArg() > 0 {
		return cfg, 2, fmt.Errorf("unexpected argument %q (frustumd takes flags only, or the command hash-token)", fs.Arg(0))
	}
	if cfg.Workers < 0 {
		return cfg, 2, fmt.Errorf("--workers %d: want a positive number", cfg.Workers)
	}
	if cfg.Retention < 0 || cfg.Grace < 0 {
		return cfg, 2, errors.New("--grace and --retention must not be negative")
	}
	if cfg.DataDir == "" {
		return cfg, 2, errors.New("no data directory: set --data, $XDG_DATA_HOME or $HOME")
	}
	cfg.MaxMemory = int64(maxMemory)
	if maxRequest > math.MaxInt32 {
		return cfg, 2, fmt.Errorf("--max-request: at most %d bytes", math.MaxInt32)
	}
	cfg.MaxRequestBytes = int(maxRequest)
	return cfg, 0, nil
}

// defaultDataDir is $XDG_DATA_HOME/frustum or ~/.local/share/frustum.
func defaultDataDir() string {
	if d := os.Getenv("XDG_DATA_HOME"); d != "" && filepath.IsAbs(d) {
		return filepath.Join(d, "frustum")
	}
	if home, err := os.UserHomeDir(); err == nil {
		return filepath.Join(home, ".local", "share", "frustum")
	}
	return ""
}

// hashToken prints the hex SHA-256 of the token on stdin (its first line,
// white space trimmed).
func hashToken(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	if len(args) > 0 {
		if args[0] == "-h" || args[0] == "--help" || args[0] == "-help" {
			fmt.Fprint(stderr, "usage: frustumd hash-token < TOKEN\n\nPrints the hex SHA-256 of the token on standard input (its first line),\nfor a line \"NAME HASH\" of the token file.\n\nExample:\n  echo \"usera $(frustumd hash-token < usera.token)\" >> tokens\n")
			return 0
		}
		fmt.Fprintln(stderr, "frustumd hash-token: takes no arguments; give the token on standard input")
		return 2
	}
	line, err := bufio.NewReader(stdin).ReadString('\n')
	if err != nil && !errors.Is(err, io.EOF) {
		fmt.Fprintln(stderr, "frustumd hash-token:", err)
		return 1
	}
	token := strings.TrimSpace(line)
	if token == "" {
		fmt.Fprintln(stderr, "frustumd hash-token: no token on standard input")
		return 1
	}
	fmt.Fprintln(stdout, server.HashToken(token))
	return 0
}

// sizeFlag is a byte count such as 512MiB, 4GiB or 8e9.
type sizeFlag int64

func (f *sizeFlag) String() string {
	if *f == 0 {
		return ""
	}
	return strconv.FormatInt(int64(*f), 10)
}

func (f *sizeFlag) Set(s string) error {
	n, err := parseSize(s)
	if err != nil {
		return err
	}
	*f = sizeFlag(n)
	return nil
}

var sizeUnits = map[string]float64{
	"": 1, "b": 1,
	"kib": 1 << 10, "mib": 1 << 20, "gib": 1 << 30, "tib": 1 << 40,
	"kb": 1e3, "mb": 1e6, "gb": 1e9, "tb": 1e12,
}

var reSize = regexp.MustCompile(`^([0-9]+(?:\.[0-9]*)?(?:[eE][0-9]+)?|\.[0-9]+)\s*([A-Za-z]*)$`)

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
		return 0, fmt.Errorf("%q: a size of at least 1 byte", s)
	}
	if b >= math.MaxInt64 {
		return 0, fmt.Errorf("%q is too large", s)
	}
	return int64(b), nil
}

// Command frustumd is Frustum's job service: a durable gRPC JobService that
// runs spectrum, thermo and magnetization tasks for several users on one
// machine.
//
// Usage:
//
//	frustumd [--listen HOST:PORT] [--data DIR] [--workers N] [--max-memory SIZE]
//	         [--grace DUR] [--retention DUR] [--tls-cert FILE --tls-key FILE] [--tokens FILE]
//	         [--max-request SIZE] [--max-sites N]
//	frustumd hash-token < token
//
// It listens on 127.0.0.1:7447 by default and keeps its jobs in
// DIR/jobs.db, DIR being $XDG_DATA_HOME/frustum or ~/.local/share/frustum.
// Every accepted job is synced to disk before the call returns; a restart
// finds every job again and runs those that were queued or running.
//
// On loopback it needs no authentication: every caller is the user
// "local". On any other address it refuses to start without TLS (--tls-cert
// and --tls-key) and a token file (--tokens): one line per user, NAME and
// the hex SHA-256 of the user's token, which `frustumd hash-token` prints
// from the token on its standard input. Clients send the token as the
// metadata "authorization: Bearer TOKEN"; each user sees only their own
// jobs.
//
// SIGTERM or SIGINT stops it: no new jobs, running jobs get the grace period
// (--grace, default 30s) to finish, the rest are queued again for the next
// start. A second signal ends the process at once. Logs go to standard
// error.
//
// Example:
//
//	head -c 16 /dev/urandom | od -An -tx1 | tr -d ' \n' > usera.token   # give usera this token
//	echo "usera $(frustumd hash-token < usera.token)" > tokens
//	frustumd --listen 0.0.0.0:7447 --tls-cert cert.pem --tls-key key.pem --tokens tokens
package main

import (
	"os"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdin, os.Stdout, os.Stderr))
}

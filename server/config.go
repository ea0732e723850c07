package server

import (
	"bufio"
	"errors"
	"fmt"
	"net"
	"os"
	"runtime"
	"strconv"
	"strings"
	"time"
)

// Defaults of the zero fields of Config.
const (
	DefaultListen          = "127.0.0.1:7447"
	DefaultGrace           = 30 * time.Second
	DefaultMaxRequestBytes = 4 << 20
	DefaultMaxSites        = 40
	// FallbackMaxMemory is the memory allowed when the machine's memory
	// cannot be read from /proc/meminfo.
	FallbackMaxMemory = 4 << 30
)

// Config configures a Server. The zero value of every field but DataDir is
// a documented default.
type Config struct {
	// Listen is the address that Serve listens on when it is given no
	// listener, and the address whose security New checks: anything but a
	// loopback address (127.0.0.0/8, ::1, localhost) needs TLSCert, TLSKey
	// and TokenFile. Default DefaultListen.
	Listen string
	// DataDir holds the job database, DataDir/jobs.db. Required.
	DataDir string
	// Workers is the number of jobs that run at once; 0 means
	// runtime.NumCPU(). Each job's engine gets max(1, NumCPU/Workers)
	// goroutines.
	Workers int
	// MaxMemory is the memory in bytes that the running jobs' estimates may
	// add up to; a job whose estimate alone exceeds it is refused at create
	// time. 0 means half of the machine's memory (MemTotal of
	// /proc/meminfo), or FallbackMaxMemory where that cannot be read.
	MaxMemory int64
	// Grace is how long Shutdown lets running jobs finish before it cancels
	// them and queues them again; 0 means DefaultGrace.
	Grace time.Duration
	// Retention is the age after which finished jobs are deleted, checked
	// every minute; 0 keeps them until deleted.
	Retention time.Duration
	// TLSCert and TLSKey are PEM files of the server's certificate and
	// key; both or neither.
	TLSCert, TLSKey string
	// TokenFile lists the users, one line "NAME SHA256HEX" each (see
	// ParseTokens). Without it every caller is the user "local".
	TokenFile string
	// MaxRequestBytes is the largest request message accepted; 0 means
	// DefaultMaxRequestBytes. Larger requests are refused with
	// RESOURCE_EXHAUSTED before anything is decoded.
	MaxRequestBytes int
	// MaxSites is the largest cluster accepted; 0 means DefaultMaxSites.
	MaxSites int
}

// withDefaults returns c with its zero fields set to the defaults.
func (c Config) withDefaults() Config {
	if c.Listen == "" {
		c.Listen = DefaultListen
	}
	if c.Workers <= 0 {
		c.Workers = runtime.NumCPU()
	}
	if c.MaxMemory <= 0 {
		c.MaxMemory = DefaultMaxMemory()
	}
	if c.Grace <= 0 {
		c.Grace = DefaultGrace
	}
	if c.MaxRequestBytes <= 0 {
		c.MaxRequestBytes = DefaultMaxRequestBytes
	}
	if c.MaxSites <= 0 {
		c.MaxSites = DefaultMaxSites
	}
	return c
}

// engineWorkers is the number of goroutines each job's engine gets.
func (c Config) engineWorkers() int {
	return max(1, runtime.NumCPU()/c.Workers)
}

// DefaultMaxMemory returns half of the machine's memory, or
// FallbackMaxMemory when /proc/meminfo cannot be read.
func DefaultMaxMemory() int64 {
	total, err := machineMemory("/proc/meminfo")
	if err != nil || total <= 0 {
		return FallbackMaxMemory
	}
	return total / 2
}

// machineMemory reads MemTotal (in kB) from a meminfo file and returns it
// in bytes.
func machineMemory(path string) (int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		rest, ok := strings.CutPrefix(sc.Text(), "MemTotal:")
		if !ok {
			continue
		}
		fields := strings.Fields(rest)
		if len(fields) == 0 {
			break
		}
		kb, err := strconv.ParseInt(fields[0], 10, 64)
		if err != nil {
			return 0, fmt.Errorf("%s: MemTotal: %w", path, err)
		}
		return kb << 10, nil
	}
	if err := sc.Err(); err != nil {
		return 0, err
	}
	return 0, errors.New(path + ": no MemTotal line")
}

// IsLoopback reports whether the listen address hostport ("host:port")
// names only loopback interfaces: an IP in 127.0.0.0/8, ::1, or
// "localhost". An empty host (every interface) is not loopback.
func IsLoopback(hostport string) bool {
	host, _, err := net.SplitHostPort(hostport)
	if err != nil {
		return false
	}
	if strings.EqualFold(host, "localhost") {
		return true
	}
	ip := net.ParseIP(strings.TrimSuffix(strings.TrimPrefix(host, "["), "]"))
	return ip != nil && ip.IsLoopback()
}

// addrIsLoopback reports whether a bound address is a loopback address.
func addrIsLoopback(a net.Addr) bool {
	switch a := a.(type) {
	case *net.TCPAddr:
		return a.IP.IsLoopback()
	case *net.UnixAddr:
		return true // a socket file: reachable only on this machine
	}
	return a != nil && IsLoopback(a.String())
}

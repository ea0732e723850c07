package server

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/reflection"
	"google.golang.org/protobuf/types/known/timestamppb"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/server/store"
	"frustum/tasks"
)

// Server is frustumd: the JobService, its store and its scheduler.
type Server struct {
	frustumv1.UnimplementedJobServiceServer

	cfg    Config
	log    *slog.Logger
	grpc   *grpc.Server
	health *health.Server
	sched  *scheduler
	hub    *hub
	secure bool // TLS and tokens: any address may be served

	// storeMu guards store against use after Close: writers of the
	// scheduler take it for reading through storeDo.
	storeMu     sync.RWMutex
	store       *store.Store
	storeClosed bool

	draining   atomic.Bool   // Shutdown began: CreateJob is refused
	shutdownCh chan struct{} // closed when watches must end
	stopOnce   sync.Once
	stopErr    error
	retention  chan struct{} // closed to stop the retention loop
	retDone    chan struct{}

	addrMu sync.Mutex
	addr   net.Addr

	recovered []queued  // jobs found queued by New, scheduled by Serve
	startOnce sync.Once // schedules recovered

	// Settings that tests change.
	inlineResultBytes int               // larger results are left out of GetJob
	chunkBytes        int               // GetJobResult chunk size
	runTask           taskFunc          // tasks.Run
	testHookRun       func(name string) // called as each attempt starts
}

// Inline and chunk limits of results.
const (
	InlineResultBytes = 1 << 20
	ResultChunkBytes  = 1 << 20
)

// abandonAfter bounds the wait for a cancelled engine to return during
// Shutdown; a job still running then is stored QUEUED without it.
const abandonAfter = 5 * time.Second

// stopTimeout bounds GracefulStop before Stop closes the connections.
const stopTimeout = 5 * time.Second

// New checks the configuration, opens the store at DataDir/jobs.db and
// recovers its jobs: every RUNNING job (the server stopped while it ran) is
// QUEUED again with its attempts kept, and every QUEUED job enters the
// scheduler, oldest first, when Serve starts. It refuses, before anything is opened or bound,
// a Listen address that is not loopback unless TLSCert, TLSKey and
// TokenFile are all given.
func New(cfg Config, log *slog.Logger) (*Server, error) {
	cfg = cfg.withDefaults()
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	if (cfg.TLSCert == "") != (cfg.TLSKey == "") {
		return nil, errors.New("frustumd: give both a TLS certificate and its key, or neither")
	}
	secure := cfg.TLSCert != "" && cfg.TokenFile != ""
	if !IsLoopback(cfg.Listen) && !secure {
		return nil, fmt.Errorf("frustumd: refusing to listen on %s without TLS and tokens: an address that is not loopback (127.0.0.0/8, ::1, localhost) needs a certificate and key (--tls-cert, --tls-key) and a token file (--tokens)", cfg.Listen)
	}
	if cfg.DataDir == "" {
		return nil, errors.New("frustumd: no data directory given")
	}
	opts := []grpc.ServerOption{
		grpc.MaxRecvMsgSize(cfg.MaxRequestBytes),
		grpc.WaitForHandlers(true),
	}
	if cfg.TLSCert != "" {
		cert, err := tls.LoadX509KeyPair(cfg.TLSCert, cfg.TLSKey)
		if err != nil {
			return nil, fmt.Errorf("frustumd: TLS certificate: %w", err)
		}
		opts = append(opts, grpc.Creds(credentials.NewTLS(&tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12})))
	}
	auth := &authenticator{}
	if cfg.TokenFile != "" {
		tokens, err := LoadTokens(cfg.TokenFile)
		if err != nil {
			return nil, fmt.Errorf("frustumd: %w", err)
		}
		auth.tokens = tokens
	}
	opts = append(opts,
		grpc.ChainUnaryInterceptor(recoverUnary(log), auth.unary),
		grpc.ChainStreamInterceptor(recoverStream(log), auth.stream))

	if err := os.MkdirAll(cfg.DataDir, 0o700); err != nil {
		return nil, fmt.Errorf("frustumd: data directory: %w", err)
	}
	st, err := store.Open(filepath.Join(cfg.DataDir, "jobs.db"))
	if err != nil {
		return nil, fmt.Errorf("frustumd: %w", err)
	}
	s := &Server{
		cfg:               cfg,
		log:               log,
		grpc:              grpc.NewServer(opts...),
		health:            health.NewServer(),
		hub:               newHub(),
		secure:            secure,
		store:             st,
		shutdownCh:        make(chan struct{}),
		inlineResultBytes: InlineResultBytes,
		chunkBytes:        ResultChunkBytes,
		runTask:           tasks.Run,
	}
	s.sched = newScheduler(s, cfg.Workers, cfg.MaxMemory, cfg.engineWorkers())
	frustumv1.RegisterJobServiceServer(s.grpc, s)
	healthpb.RegisterHealthServer(s.grpc, s.health)
	reflection.Register(s.grpc)
	s.health.SetServingStatus("", healthpb.HealthCheckResponse_SERVING)
	s.health.SetServingStatus(frustumv1.JobService_ServiceDesc.ServiceName, healthpb.HealthCheckResponse_SERVING)

	queued, err := s.recover()
	if err != nil {
		st.Close()
		return nil, fmt.Errorf("frustumd: recovering jobs: %w", err)
	}
	if cfg.Retention > 0 {
		s.retention = make(chan struct{})
		s.retDone = make(chan struct{})
		go s.retain()
	}
	attrs := []any{"listen", cfg.Listen, "data", cfg.DataDir, "workers", cfg.Workers,
		"engine_workers", cfg.engineWorkers(), "max_memory", ed.FormatBytes(cfg.MaxMemory),
		"tls", cfg.TLSCert != "", "tokens", cfg.TokenFile != "", "queued", len(queued)}
	if stats, err := st.Stats(); err == nil {
		for _, state := range []frustumv1.Job_State{frustumv1.Job_SUCCEEDED, frustumv1.Job_FAILED, frustumv1.Job_CANCELLED} {
			attrs = append(attrs, strings.ToLower(state.String()), stats[state])
		}
	}
	log.Info("frustumd ready", attrs...)
	s.recovered = queued
	return s, nil
}

// recover finds every unfinished job: RUNNING ones are stored QUEUED again
// (attempts kept), and every queued job is planned again against this
// server's limits. It returns the jobs to schedule, oldest first.
func (s *Server) recover() ([]queued, error) {
	jobs, err := s.store.Unfinished()
	if err != nil {
		return nil, err
	}
	opt := s.planOptions()
	var out []queued
	for _, j := range jobs {
		if j.GetState() == frustumv1.Job_RUNNING {
			if _, _, err := s.store.Result(j.GetName()); err == nil {
				// Never run a job twice whose result is stored.
				if _, err := s.store.Update(j.GetName(), func(j *frustumv1.Job) error {
					j.State = frustumv1.Job_SUCCEEDED
					if j.EndTime == nil {
						j.EndTime = timestamppb.Now()
					}
					return nil
				}); err != nil {
					return nil, err
				}
				continue
			}
		}
		plan, planErr := tasks.Plan(j.GetSpec(), opt)
		j, err = s.store.Update(j.GetName(), func(j *frustumv1.Job) error {
			if j.State == frustumv1.Job_RUNNING {
				requeueJob(j)
			}
			if planErr != nil {
				// The limits changed since the job was accepted.
				j.State = frustumv1.Job_FAILED
				j.EndTime = timestamppb.Now()
				j.Error = jobError(planErr)
				return nil
			}
			j.Plan = plan
			return nil
		})
		if err != nil {
			return nil, err
		}
		if planErr != nil {
			s.log.Warn("queued job refused on restart", "name", j.GetName(), "owner", j.GetOwner(), "err", planErr)
			continue
		}
		out = append(out, queued{name: j.GetName(), owner: j.GetOwner(), mem: j.GetPlan().GetMemoryBytes()})
	}
	return out, nil
}

// planOptions are the engine options of tasks.Plan at create time: the
// server's memory limit and the engine workers each job gets, since the
// estimate counts the blocks in flight at once.
func (s *Server) planOptions() ed.Options {
	return ed.Options{Limits: ed.Limits{MaxMemory: s.cfg.MaxMemory}, Workers: s.cfg.engineWorkers()}
}

// errStoreClosed is returned by storeDo after Shutdown closed the store.
var errStoreClosed = errors.New("the job store is closed")

// storeDo runs f unless the store is closed.
func (s *Server) storeDo(f func() error) error {
	s.storeMu.RLock()
	defer s.storeMu.RUnlock()
	if s.storeClosed {
		return errStoreClosed
	}
	return f()
}

// Serve serves the JobService, health checks and reflection on lis (when
// lis is nil, on a new TCP listener at Config.Listen) until Shutdown. It
// refuses a listener that is not on a loopback address unless the server
// has TLS and tokens.
func (s *Server) Serve(lis net.Listener) error {
	if lis == nil {
		var err error
		if lis, err = net.Listen("tcp", s.cfg.Listen); err != nil {
			return fmt.Errorf("frustumd: %w", err)
		}
	}
	if !s.secure && !addrIsLoopback(lis.Addr()) {
		lis.Close()
		return fmt.Errorf("frustumd: refusing to serve on %s without TLS and tokens", lis.Addr())
	}
	s.addrMu.Lock()
	s.addr = lis.Addr()
	s.addrMu.Unlock()
	s.log.Info("serving", "addr", lis.Addr().String())
	s.startOnce.Do(func() {
		for _, q := range s.recovered {
			s.sched.enqueue(q)
		}
		s.recovered = nil
	})
	return s.grpc.Serve(lis)
}

// Addr returns the address being served, or nil before Serve.
func (s *Server) Addr() net.Addr {
	s.addrMu.Lock()
	defer s.addrMu.Unlock()
	return s.addr
}

// Shutdown stops the server in order: health checks report NOT_SERVING,
// CreateJob is refused with UNAVAILABLE, running jobs get until the grace
// period (Config.Grace, or ctx's deadline if sooner) to finish, then are
// cancelled and stored QUEUED so that the next start runs them again;
// watches end, GracefulStop lets the other calls finish (Stop closes
// connections still open after a few seconds), and the store closes. Later
// calls return the first call's result.
func (s *Server) Shutdown(ctx context.Context) error {
	s.stopOnce.Do(func() { s.stopErr = s.shutdown(ctx) })
	return s.stopErr
}

func (s *Server) shutdown(ctx context.Context) error {
	s.health.Shutdown()
	s.draining.Store(true)
	s.sched.stop()
	s.log.Info("shutting down", "grace", s.cfg.Grace.String())

	grace, cancel := context.WithTimeout(ctx, s.cfg.Grace)
	idle := s.sched.waitIdle(grace)
	cancel()
	if !idle {
		interrupted := s.sched.interrupt()
		wait, cancel := context.WithTimeout(context.Background(), abandonAfter)
		if !s.sched.waitIdle(wait) {
			// An engine that does not return in time is left behind; its
			// job is queued again here and its own writes are refused once
			// the store is closed.
			for _, rj := range interrupted {
				s.sched.requeueInStore(rj.name)
			}
			s.log.Warn("jobs still running after cancellation were queued again without waiting")
		}
		cancel()
	}
	close(s.shutdownCh)
	if s.retention != nil {
		close(s.retention)
		<-s.retDone
	}

	timer := time.AfterFunc(stopTimeout, s.grpc.Stop)
	stopped := make(chan struct{})
	go func() {
		select {
		case <-ctx.Done():
			s.grpc.Stop()
		case <-stopped:
		}
	}()
	s.grpc.GracefulStop()
	close(stopped)
	timer.Stop()

	s.storeMu.Lock()
	s.storeClosed = true
	err := s.store.Close()
	s.storeMu.Unlock()
	s.log.Info("stopped")
	return err
}

// retain deletes finished jobs older than the retention age, at start and
// every minute.
func (s *Server) retain() {
	defer close(s.retDone)
	tick := time.NewTicker(time.Minute)
	defer tick.Stop()
	for {
		n, err := s.store.DeleteFinishedBefore(time.Now().Add(-s.cfg.Retention))
		switch {
		case err != nil:
			s.log.Error("retention", "err", err)
		case n > 0:
			s.log.Info("retention deleted finished jobs", "count", n, "older_than", s.cfg.Retention.String())
		}
		select {
		case <-s.retention:
			return
		case <-tick.C:
		}
	}
}

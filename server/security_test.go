package server

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"

	frustumv1 "frustum/proto/frustum/v1"
)

func TestAuth(t *testing.T) {
	tokens := writeTokens(t, map[string]string{"usera": "usera-secret", "userb": "userb-secret"})
	f := &fakeTask{step: 10 * time.Millisecond, steps: 3}
	ts := start(t, Config{Workers: 1, TokenFile: tokens}, func(s *Server) { s.runTask = f.run })
	usera, userb := tctx(t, "usera-secret"), tctx(t, "userb-secret")

	job, err := ts.client.CreateJob(usera, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	if err != nil {
		t.Fatal(err)
	}
	if job.GetOwner() != "usera" {
		t.Errorf("owner %q, want usera", job.GetOwner())
	}
	watchUntil(t, ts.client, usera, job.GetName())
	name := job.GetName()

	// Without a token, or with an unknown one, nothing is reachable.
	for _, tok := range []string{"", "wrong-secret"} {
		ctx := tctx(t, tok)
		_, err := ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{})
		wantCode(t, "ListJobs with token "+tok, err, codes.Unauthenticated)
		_, err = ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: name})
		wantCode(t, "GetJob with token "+tok, err, codes.Unauthenticated)
		_, err = ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(2)})
		wantCode(t, "CreateJob with token "+tok, err, codes.Unauthenticated)
		stream, err := ts.client.WatchJob(ctx, &frustumv1.WatchJobRequest{Name: name})
		if err == nil {
			_, err = stream.Recv()
		}
		wantCode(t, "WatchJob with token "+tok, err, codes.Unauthenticated)
	}
	// A malformed authorization header.
	ctx := tctx(t, "")
	_, err = ts.client.ListJobs(metadata.AppendToOutgoingContext(ctx, "authorization", "Basic YWxpY2U6eA=="), &frustumv1.ListJobsRequest{})
	wantCode(t, "Basic authorization", err, codes.Unauthenticated)

	// Userb sees nothing of usera's.
	resp, err := ts.client.ListJobs(userb, &frustumv1.ListJobsRequest{})
	if err != nil || len(resp.GetJobs()) != 0 {
		t.Errorf("userb lists %v, %v; want nothing", resp.GetJobs(), err)
	}
	_, err = ts.client.GetJob(userb, &frustumv1.GetJobRequest{Name: name})
	wantCode(t, "userb gets usera's job", err, codes.PermissionDenied)
	_, err = ts.client.CancelJob(userb, &frustumv1.CancelJobRequest{Name: name})
	wantCode(t, "userb cancels usera's job", err, codes.PermissionDenied)
	_, err = ts.client.DeleteJob(userb, &frustumv1.DeleteJobRequest{Name: name})
	wantCode(t, "userb deletes usera's job", err, codes.PermissionDenied)
	stream, err := ts.client.WatchJob(userb, &frustumv1.WatchJobRequest{Name: name})
	if err == nil {
		_, err = stream.Recv()
	}
	wantCode(t, "userb watches usera's job", err, codes.PermissionDenied)
	rstream, err := ts.client.GetJobResult(userb, &frustumv1.GetJobResultRequest{Name: name})
	if err == nil {
		_, err = rstream.Recv()
	}
	wantCode(t, "userb fetches usera's result", err, codes.PermissionDenied)
	_, err = ts.client.GetJob(userb, &frustumv1.GetJobRequest{Name: "jobs/0123456789abcdef01234567"})
	wantCode(t, "userb gets a job that does not exist", err, codes.NotFound)

	// Userb's identical spec is not answered from usera's result.
	userbs, err := ts.client.CreateJob(userb, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	if err != nil || userbs.GetFromCache() || userbs.GetOwner() != "userb" {
		t.Errorf("userb's identical spec: %v, %v", userbs, err)
	}
	// And usera's is.
	again, err := ts.client.CreateJob(usera, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	if err != nil || !again.GetFromCache() {
		t.Errorf("usera's identical spec: %v, %v", again, err)
	}
	// The same request id of two users makes two jobs.
	a1, err1 := ts.client.CreateJob(usera, &frustumv1.CreateJobRequest{Spec: thermoSpec(3), RequestId: "same"})
	b1, err2 := ts.client.CreateJob(userb, &frustumv1.CreateJobRequest{Spec: thermoSpec(3), RequestId: "same"})
	if err1 != nil || err2 != nil || a1.GetName() == b1.GetName() {
		t.Errorf("one request id, two users: %v %v, %v %v", a1.GetName(), err1, b1.GetName(), err2)
	}

	// Health and reflection need no token.
	h, err := healthpb.NewHealthClient(ts.conn).Check(tctx(t, ""), &healthpb.HealthCheckRequest{})
	if err != nil || h.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health without a token: %v, %v", h, err)
	}
	h, err = healthpb.NewHealthClient(ts.conn).Check(tctx(t, ""), &healthpb.HealthCheckRequest{Service: "frustum.v1.JobService"})
	if err != nil || h.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("JobService health: %v, %v", h, err)
	}
	rc, err := reflectionpb.NewServerReflectionClient(ts.conn).ServerReflectionInfo(tctx(t, ""))
	if err != nil {
		t.Fatal(err)
	}
	if err := rc.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}}); err != nil {
		t.Fatal(err)
	}
	r, err := rc.Recv()
	if err != nil {
		t.Fatalf("reflection without a token: %v", err)
	}
	found := false
	for _, s := range r.GetListServicesResponse().GetService() {
		found = found || s.GetName() == "frustum.v1.JobService"
	}
	if !found {
		t.Errorf("reflection lists %v, without frustum.v1.JobService", r.GetListServicesResponse().GetService())
	}
}

// TestRefuseInsecure checks that an address that is not loopback needs TLS
// and tokens, and that New refuses before it opens or binds anything.
func TestRefuseInsecure(t *testing.T) {
	certFile, keyFile, _ := writeCert(t)
	tokens := writeTokens(t, map[string]string{"usera": "a"})
	for _, tc := range []struct {
		name string
		cfg  Config
	}{
		{"plain", Config{Listen: "0.0.0.0:0"}},
		{"empty host", Config{Listen: ":7447"}},
		{"host name", Config{Listen: "example.invalid:7447"}},
		{"TLS without tokens", Config{Listen: "0.0.0.0:0", TLSCert: certFile, TLSKey: keyFile}},
		{"tokens without TLS", Config{Listen: "[::]:0", TokenFile: tokens}},
	} {
		dir := filepath.Join(t.TempDir(), "data")
		tc.cfg.DataDir = dir
		s, err := New(tc.cfg, nil)
		if err == nil {
			s.Shutdown(t.Context())
			t.Errorf("%s: New(%+v) started", tc.name, tc.cfg)
			continue
		}
		if !strings.Contains(err.Error(), "TLS") || !strings.Contains(err.Error(), "token") {
			t.Errorf("%s: error %q does not say that TLS and tokens are needed", tc.name, err)
		}
		if _, err := os.Stat(dir); !os.IsNotExist(err) {
			t.Errorf("%s: the data directory was created before the refusal", tc.name)
		}
	}
	// Loopback addresses need neither.
	for _, addr := range []string{"127.0.0.1:0", "127.3.4.5:0", "[::1]:0", "localhost:0", "LOCALHOST:0"} {
		if !IsLoopback(addr) {
			t.Errorf("IsLoopback(%q) = false", addr)
		}
	}
	// A server configured for loopback refuses to serve on another address.
	s, err := New(Config{DataDir: t.TempDir()}, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Shutdown(t.Context())
	lis, err := net.Listen("tcp", "0.0.0.0:0")
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Serve(lis); err == nil || !strings.Contains(err.Error(), "TLS") {
		t.Errorf("Serve on 0.0.0.0: %v", err)
	}
}

func TestTokenFile(t *testing.T) {
	for _, tc := range []struct {
		name, text, want string
	}{
		{"one field", "usera\n", ":1: want two fields"},
		{"three fields", "# users\n\nusera " + HashToken("x") + " extra\n", ":3: want two fields"},
		{"short hash", "usera abcd\n", ":1: the hash of user \"usera\" has 4 characters"},
		{"not hex", "usera " + strings.Repeat("zz", 32) + "\n", ":1: the hash of user \"usera\" is not hex"},
		{"user twice", "usera " + HashToken("x") + "\nusera " + HashToken("y") + "\n", ":2: user \"usera\" is listed twice"},
		{"token twice", "usera " + HashToken("x") + "\nuserb " + HashToken("x") + "\n", ":2: user \"userb\" has the same token"},
		{"empty", "# nobody\n", "lists no users"},
	} {
		path := filepath.Join(t.TempDir(), "tokens")
		os.WriteFile(path, []byte(tc.text), 0o600)
		_, err := New(Config{DataDir: t.TempDir(), TokenFile: path}, nil)
		if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), path) {
			t.Errorf("%s: New: %v, want an error naming %s and %q", tc.name, err, path, tc.want)
		}
	}
	tok, err := ParseTokens(strings.NewReader("  # comment\nusera "+strings.ToUpper(HashToken("s3cret"))+"\n\n"), "t")
	if err != nil || len(tok) != 1 {
		t.Fatalf("ParseTokens: %v, %v", tok, err)
	}
	// SHA-256 of "secret", as sha256sum prints it.
	if got := HashToken("secret"); got != "2bb80d537b1da3e38bd30361aa855686bde0eacd7162fef6a25fe97bf527a25b" {
		t.Errorf("HashToken(secret) = %s", got)
	}
}

// TestTLS serves with TLS and tokens on a server configured for every
// interface, and calls it over TLS with a token.
func TestTLS(t *testing.T) {
	certFile, keyFile, pool := writeCert(t)
	tokens := writeTokens(t, map[string]string{"usera": "usera-secret"})
	s, err := New(Config{Listen: "0.0.0.0:0", DataDir: t.TempDir(), Workers: 1, TLSCert: certFile, TLSKey: keyFile, TokenFile: tokens}, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	creds := credentials.NewTLS(&tls.Config{RootCAs: pool, ServerName: "127.0.0.1", MinVersion: tls.VersionTLS12})
	ts := serveOn(t, s, []grpc.DialOption{grpc.WithTransportCredentials(creds)})
	ctx := tctx(t, "usera-secret")
	job, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(4)})
	if err != nil {
		t.Fatalf("CreateJob over TLS: %v", err)
	}
	if msgs := watchUntil(t, ts.client, ctx, job.GetName()); msgs[len(msgs)-1].GetState() != frustumv1.Job_SUCCEEDED {
		t.Errorf("job over TLS ended %v", msgs[len(msgs)-1])
	}
	_, err = ts.client.ListJobs(tctx(t, ""), &frustumv1.ListJobsRequest{})
	wantCode(t, "TLS without a token", err, codes.Unauthenticated)
	h, err := healthpb.NewHealthClient(ts.conn).Check(tctx(t, ""), &healthpb.HealthCheckRequest{})
	if err != nil || h.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health over TLS: %v, %v", h, err)
	}
}

// writeCert writes a self-signed certificate for 127.0.0.1 and its key,
// and returns their files and a pool that trusts the certificate.
func writeCert(t *testing.T) (certFile, keyFile string, pool *x509.CertPool) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber:          big.NewInt(1),
		Subject:               pkix.Name{CommonName: "frustumd test"},
		NotBefore:             time.Now().Add(-time.Hour),
		NotAfter:              time.Now().Add(time.Hour),
		KeyUsage:              x509.KeyUsageDigitalSignature | x509.KeyUsageCertSign,
		ExtKeyUsage:           []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
		IPAddresses:           []net.IP{net.IPv4(127, 0, 0, 1)},
		BasicConstraintsValid: true,
		IsCA:                  true,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	keyDER, err := x509.MarshalPKCS8PrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	certFile, keyFile = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	if err := os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "PRIVATE KEY", Bytes: keyDER}), 0o600); err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	pool = x509.NewCertPool()
	pool.AddCert(cert)
	return certFile, keyFile, pool
}

package stream

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"errors"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"forewarn/stream/streamtest"
)

// selfSigned writes a self-signed server certificate for 127.0.0.1 and
// localhost into dir and returns the paths of the certificate (also the
// CA) and its key.
func selfSigned(t *testing.T, dir string) (certFile, keyFile string) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber:          big.NewInt(1),
		Subject:               pkix.Name{CommonName: "forewarn test"},
		NotBefore:             time.Now().Add(-time.Hour),
		NotAfter:              time.Now().Add(time.Hour),
		KeyUsage:              x509.KeyUsageDigitalSignature | x509.KeyUsageCertSign,
		ExtKeyUsage:           []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
		BasicConstraintsValid: true,
		IsCA:                  true,
		DNSNames:              []string{"localhost"},
		IPAddresses:           []net.IP{net.ParseIP("127.0.0.1")},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	kder, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	certFile, keyFile = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	if err := os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kder}), 0o600); err != nil {
		t.Fatal(err)
	}
	return certFile, keyFile
}

func TestConnectTLSUserPassword(t *testing.T) {
	dir := t.TempDir()
	certFile, keyFile := selfSigned(t, dir)
	cert, err := tls.LoadX509KeyPair(certFile, keyFile)
	if err != nil {
		t.Fatal(err)
	}
	opts := streamtest.Options(t)
	opts.TLS = true
	opts.TLSConfig = &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	opts.Username, opts.Password = "forewarn", "s3cret"
	_, url := streamtest.RunServerWith(t, opts)

	nc, err := Connect(url, Auth{User: "forewarn", Password: "s3cret", CAFile: certFile}, "forewarn-test")
	if err != nil {
		t.Fatalf("connect with TLS and password: %v", err)
	}
	defer nc.Close()
	if !nc.TLSRequired() {
		t.Error("connection is not using TLS")
	}
	if st, err := nc.TLSConnectionState(); err != nil || !st.HandshakeComplete {
		t.Errorf("TLS state %v, %v", st.HandshakeComplete, err)
	}
	if err := nc.Publish("x", nil); err != nil || nc.Flush() != nil {
		t.Errorf("publish over TLS: %v", err)
	}

	if _, err := Connect(url, Auth{User: "forewarn", Password: "wrong", CAFile: certFile}, "t"); !errors.Is(err, ErrConnect) ||
		!strings.Contains(err.Error(), "check the user") {
		t.Errorf("wrong password: %v", err)
	}
	if _, err := Connect(url, Auth{User: "forewarn", Password: "s3cret"}, "t"); !errors.Is(err, ErrConnect) {
		t.Errorf("unverifiable certificate should fail: %v", err)
	}
	if _, err := Connect(url, Auth{User: "forewarn", Password: "s3cret", CAFile: certFile, ServerName: "other.example"}, "t"); !errors.Is(err, ErrConnect) {
		t.Errorf("wrong server name should fail: %v", err)
	}
}

func TestConnectToken(t *testing.T) {
	opts := streamtest.Options(t)
	opts.Authorization = "tok123"
	_, url := streamtest.RunServerWith(t, opts)
	nc, err := Connect(url, Auth{Token: "tok123"}, "t")
	if err != nil {
		t.Fatal(err)
	}
	nc.Close()
	if _, err := Connect(url, Auth{}, "t"); !errors.Is(err, ErrConnect) {
		t.Errorf("no token: %v", err)
	}
}

func TestAuthProblems(t *testing.T) {
	for _, a := range []Auth{
		{User: "u", Token: "t"},
		{Password: "p"},
		{CertFile: "c.pem"},
		{NKeySeedFile: filepath.Join(t.TempDir(), "absent.nk")},
	} {
		if _, err := Connect("nats://127.0.0.1:1", a, "t"); !errors.Is(err, ErrAuth) {
			t.Errorf("%+v: got %v, want ErrAuth", a, err)
		}
	}
}

func TestConnectNoServer(t *testing.T) {
	_, err := Connect("nats://127.0.0.1:1", Auth{}, "t")
	if !errors.Is(err, ErrConnect) || !strings.Contains(err.Error(), "127.0.0.1:1") {
		t.Fatalf("got %v", err)
	}
}

func TestStartEmbedded(t *testing.T) {
	s, url, err := StartEmbedded(EmbeddedOptions{Listen: "127.0.0.1:0", StoreDir: t.TempDir(), SyncAlways: true})
	if err != nil {
		t.Fatal(err)
	}
	defer func() { s.Shutdown(); s.WaitForShutdown() }()
	if !s.JetStreamEnabled() || !s.JetStreamConfig().SyncAlways {
		t.Errorf("JetStream %v, sync always %v", s.JetStreamEnabled(), s.JetStreamConfig().SyncAlways)
	}
	nc, err := Connect(url, Auth{}, "t")
	if err != nil {
		t.Fatal(err)
	}
	nc.Close()

	// A second server on the same address cannot start.
	addr := strings.TrimPrefix(url, "nats://")
	_, _, err = StartEmbedded(EmbeddedOptions{Listen: addr, StoreDir: t.TempDir(), ReadyTimeout: 2 * time.Second})
	if !errors.Is(err, ErrServerStart) || !strings.Contains(err.Error(), addr) {
		t.Fatalf("address in use: %v", err)
	}
	for _, o := range []EmbeddedOptions{
		{Listen: "nohost", StoreDir: "x"},
		{Listen: "127.0.0.1:99999", StoreDir: "x"},
		{Listen: "127.0.0.1:0"},
	} {
		if _, _, err := StartEmbedded(o); !errors.Is(err, ErrServerStart) {
			t.Errorf("%+v: got %v", o, err)
		}
	}
}

func TestReconnectDelay(t *testing.T) {
	want := []time.Duration{100, 100, 200, 400, 800, 1600, 3200, 5000, 5000}
	for i, w := range want {
		if got := reconnectDelay(i); got != w*time.Millisecond {
			t.Errorf("attempt %d: %v, want %v", i, got, w*time.Millisecond)
		}
	}
}

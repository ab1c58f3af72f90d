package stream

import (
	"fmt"
	"net"
	"strconv"
	"time"

	"github.com/nats-io/nats-server/v2/server"

	"forewarn/config"
)

// EmbeddedOptions configure the NATS server that forewarn runs in its own
// process when no external server is named.
type EmbeddedOptions struct {
	// Listen is the client address, "host:port". Default: the
	// configuration's nats.listen, "127.0.0.1:4222".
	// Port 0 or -1 picks a free port (for tests).
	Listen string

	// StoreDir is the JetStream store directory (the daemon passes a
	// directory under its data dir). Required.
	StoreDir string

	// SyncAlways makes JetStream fsync every write to its store
	// (sync_always in the server's configuration). By default the server
	// syncs its files periodically, every 2 minutes in nats-server v2.15
	// (defaultSyncInterval in its filestore.go), so a machine crash — not a
	// process crash — can lose up to that much of the most recent
	// acknowledged messages. SyncAlways trades throughput for that window.
	SyncAlways bool

	// ReadyTimeout bounds the wait for the server to accept connections.
	// Default 10 s.
	ReadyTimeout time.Duration

	// Logger, when not nil, receives the server's log lines (notices,
	// warnings, errors). Default: no logging.
	Logger server.Logger
}

// StartEmbedded starts an in-process NATS server with JetStream on and
// returns it with its client URL. Stop it with Shutdown and
// WaitForShutdown. The server handles no signals (the daemon owns them).
func StartEmbedded(o EmbeddedOptions) (*server.Server, string, error) {
	listen := o.Listen
	if listen == "" {
		listen = config.Default().NATS.Listen
	}
	host, portStr, err := net.SplitHostPort(listen)
	if err != nil {
		return nil, "", fmt.Errorf("%w: listen address %q: %v; use host:port such as 127.0.0.1:4222", ErrServerStart, listen, err)
	}
	port, err := strconv.Atoi(portStr)
	if err != nil || port < -1 || port > 65535 {
		return nil, "", fmt.Errorf("%w: listen address %q: port %q is not a number in 0..65535", ErrServerStart, listen, portStr)
	}
	if port == 0 {
		port = -1 // the server's "random port"
	}
	if o.StoreDir == "" {
		return nil, "", fmt.Errorf("%w: no JetStream store directory given", ErrServerStart)
	}
	timeout := o.ReadyTimeout
	if timeout <= 0 {
		timeout = 10 * time.Second
	}
	opts := &server.Options{
		ServerName: "forewarn-embedded",
		Host:       host,
		Port:       port,
		JetStream:  true,
		StoreDir:   o.StoreDir,
		SyncAlways: o.SyncAlways,
		NoSigs:     true,
		NoLog:      o.Logger == nil,
		// No HTTP monitoring, cluster, gateway or leaf node listeners.
	}
	s, err := server.NewServer(opts)
	if err != nil {
		return nil, "", fmt.Errorf("%w on %s: %w", ErrServerStart, listen, err)
	}
	if o.Logger != nil {
		s.SetLoggerV2(o.Logger, false, false, false)
	}
	s.Start()
	if !s.ReadyForConnections(timeout) {
		s.Shutdown()
		s.WaitForShutdown()
		return nil, "", fmt.Errorf("%w on %s within %s: address in use?", ErrServerStart, listen, timeout)
	}
	if !s.JetStreamEnabled() {
		s.Shutdown()
		s.WaitForShutdown()
		return nil, "", fmt.Errorf("%w on %s: JetStream is not enabled (store directory %q unusable?)", ErrServerStart, listen, o.StoreDir)
	}
	return s, s.ClientURL(), nil
}

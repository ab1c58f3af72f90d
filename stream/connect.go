package stream

import (
	"crypto/tls"
	"errors"
	"fmt"
	"time"

	"github.com/nats-io/nats.go"
)

// Auth holds the credentials and TLS settings for an external NATS server.
// The zero value connects without credentials and without TLS (TLS is
// still used when the URL says tls:// or the server requires it).
// At most one of User/Password, Token, NKeySeedFile and CredsFile may be set.
type Auth struct {
	User, Password string // user and password
	Token          string // an authentication token
	NKeySeedFile   string // a file holding an NKey seed
	CredsFile      string // a credentials file (user JWT and NKey seed)

	CAFile             string // PEM roots to verify the server with; default: the system roots
	CertFile, KeyFile  string // a client certificate and its key, both or neither
	ServerName         string // the name to verify in the server's certificate; default: the URL's host
	InsecureSkipVerify bool   // do not verify the server's certificate (testing only)
}

func (a Auth) tls() bool {
	return a.CAFile != "" || a.CertFile != "" || a.KeyFile != "" || a.ServerName != "" || a.InsecureSkipVerify
}

// options maps a to nats.go options, or says what is wrong with it.
func (a Auth) options() ([]nats.Option, error) {
	var opts []nats.Option
	methods := 0
	if a.User != "" || a.Password != "" {
		if a.User == "" {
			return nil, fmt.Errorf("%w: a password without a user", ErrAuth)
		}
		methods++
		opts = append(opts, nats.UserInfo(a.User, a.Password))
	}
	if a.Token != "" {
		methods++
		opts = append(opts, nats.Token(a.Token))
	}
	if a.NKeySeedFile != "" {
		methods++
		o, err := nats.NkeyOptionFromSeed(a.NKeySeedFile)
		if err != nil {
			return nil, fmt.Errorf("%w: NKey seed file %q: %w", ErrAuth, a.NKeySeedFile, err)
		}
		opts = append(opts, o)
	}
	if a.CredsFile != "" {
		methods++
		opts = append(opts, nats.UserCredentials(a.CredsFile))
	}
	if methods > 1 {
		return nil, fmt.Errorf("%w: more than one of user/password, token, NKey seed file and credentials file is set; choose one", ErrAuth)
	}
	if (a.CertFile == "") != (a.KeyFile == "") {
		return nil, fmt.Errorf("%w: a client certificate needs both a certificate file and a key file", ErrAuth)
	}
	if a.tls() {
		// Secure first: RootCAs and ClientCert then only add their
		// callbacks to this configuration.
		opts = append(opts, nats.Secure(&tls.Config{
			MinVersion:         tls.VersionTLS12,
			ServerName:         a.ServerName,
			InsecureSkipVerify: a.InsecureSkipVerify, //nolint:gosec // opt-in, documented as testing only
		}))
		if a.CAFile != "" {
			opts = append(opts, nats.RootCAs(a.CAFile))
		}
		if a.CertFile != "" {
			opts = append(opts, nats.ClientCert(a.CertFile, a.KeyFile))
		}
	}
	return opts, nil
}

// reconnectDelay is the wait before reconnect attempt n: 100 ms doubling to
// a ceiling of 5 s, plus the client's jitter.
func reconnectDelay(attempts int) time.Duration {
	d := 100 * time.Millisecond
	for i := 1; i < attempts && d < 5*time.Second; i++ {
		d *= 2
	}
	return min(d, 5*time.Second)
}

// Connect connects to the NATS server at url (a comma-separated list is
// allowed) as the client name. Once connected, the connection reconnects
// forever with backoff (100 ms doubling to 5 s) and buffers up to 64 MiB of
// publications while disconnected. The first connection is not retried:
// a wrong URL or credentials fail at once, with an error wrapping
// ErrConnect (or ErrAuth for an unusable Auth).
func Connect(url string, a Auth, name string) (*nats.Conn, error) {
	opts, err := a.options()
	if err != nil {
		return nil, err
	}
	opts = append(opts,
		nats.Name(name),
		nats.MaxReconnects(-1),
		nats.CustomReconnectDelay(reconnectDelay),
		nats.ReconnectBufSize(64<<20),
		nats.Timeout(5*time.Second),
		nats.DrainTimeout(30*time.Second),
	)
	nc, err := nats.Connect(url, opts...)
	if err != nil {
		hint := ""
		switch {
		case errors.Is(err, nats.ErrAuthorization), errors.Is(err, nats.ErrAuthExpired), errors.Is(err, nats.ErrAuthRevoked):
			hint = " (check the user, password, token or credentials)"
		case errors.Is(err, nats.ErrNoServers):
			hint = " (is a server running there?)"
		case errors.Is(err, nats.ErrSecureConnRequired):
			hint = " (the server wants TLS: use a tls:// URL or set a CA file)"
		}
		return nil, fmt.Errorf("%w at %s: %w%s", ErrConnect, url, err, hint)
	}
	return nc, nil
}

package stream

import "errors"

var (
	// ErrServerStart is returned by StartEmbedded when the embedded NATS
	// server cannot be configured or is not ready for connections in time.
	ErrServerStart = errors.New("stream: embedded NATS server did not start")

	// ErrAuth is returned by Connect for an Auth that cannot be used as
	// given: conflicting methods, a certificate without its key, an
	// unreadable key file.
	ErrAuth = errors.New("stream: bad connection credentials")

	// ErrConnect is returned by Connect when the server cannot be reached
	// or refuses the connection.
	ErrConnect = errors.New("stream: cannot connect to NATS")

	// ErrIntake is returned by NewIntake and Run when the subscriptions,
	// the JetStream stream or its consumer cannot be set up.
	ErrIntake = errors.New("stream: intake")

	// ErrRunning is returned by Run when the Intake is already running.
	ErrRunning = errors.New("stream: intake is already running")
)

package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"time"

	"github.com/nats-io/nats.go"

	"forewarn/config"
	"forewarn/stream"
)

func init() {
	register("query", "ask a running daemon for the latest forecast of a topic", runQuery)
}

// runQuery sends a request on <prefix>.query.TOPIC and prints the reply
// as received, followed by a newline.
func runQuery(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("query", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: forewarn query [flags] TOPIC")
		fmt.Fprintln(stderr, "\nAsks a running daemon for the latest forecast of TOPIC and prints it as JSON.")
		fmt.Fprintln(stderr, "\nflags:")
		fs.PrintDefaults()
	}
	def := config.Default()
	url := fs.String("nats", "nats://"+def.NATS.Listen, "NATS server `URL` the daemon is on")
	prefix := fs.String("prefix", def.Output.Prefix, "the daemon's output subject `prefix` (output.prefix)")
	timeout := fs.Duration("timeout", 2*time.Second, "how long to wait for the reply")
	a := authFlags(fs)
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return exitOK
		}
		return exitUsage
	}
	if fs.NArg() != 1 {
		fmt.Fprintf(stderr, "forewarn query: want exactly one TOPIC, got %d arguments\n", fs.NArg())
		fs.Usage()
		return exitUsage
	}
	topic := fs.Arg(0)
	if err := config.ValidTopic(topic); err != nil {
		fmt.Fprintf(stderr, "forewarn query: %v\n", err)
		return exitUsage
	}
	if *timeout <= 0 {
		fmt.Fprintf(stderr, "forewarn query: --timeout must be positive, got %s\n", *timeout)
		return exitUsage
	}
	nc, err := stream.Connect(*url, *a, "forewarn query")
	if err != nil {
		fmt.Fprintf(stderr, "forewarn query: %v\n", err)
		if errors.Is(err, stream.ErrAuth) {
			return exitUsage
		}
		return exitFailure
	}
	defer nc.Close()
	subject := *prefix + ".query." + topic
	m, err := nc.Request(subject, nil, *timeout)
	switch {
	case errors.Is(err, nats.ErrNoResponders):
		fmt.Fprintf(stderr, "forewarn query: no daemon answers on %s (is 'forewarn run' running there, with output prefix %q?)\n", subject, *prefix)
		return exitFailure
	case errors.Is(err, nats.ErrTimeout):
		fmt.Fprintf(stderr, "forewarn query: no reply on %s within %s\n", subject, *timeout)
		return exitFailure
	case err != nil:
		fmt.Fprintf(stderr, "forewarn query: request on %s: %v\n", subject, err)
		return exitFailure
	}
	var reply struct {
		Error *string `json:"error"`
	}
	if err := json.Unmarshal(m.Data, &reply); err != nil {
		fmt.Fprintf(stderr, "forewarn query: the reply on %s is not JSON: %v\n", subject, err)
		return exitFailure
	}
	if reply.Error != nil {
		fmt.Fprintf(stderr, "forewarn query: %s\n", *reply.Error)
		return exitFailure
	}
	fmt.Fprintf(stdout, "%s\n", m.Data)
	return exitOK
}

// authFlags defines the flags of a client command that connects to a NATS
// server of the operator's (query, load) and returns where they land.
func authFlags(fs *flag.FlagSet) *stream.Auth {
	var a stream.Auth
	fs.StringVar(&a.User, "user", "", "NATS user")
	fs.StringVar(&a.Password, "password", "", "NATS password (visible to other local users; prefer --creds)")
	fs.StringVar(&a.Token, "token", "", "NATS authentication token")
	fs.StringVar(&a.NKeySeedFile, "nkey", "", "NKey seed `file`")
	fs.StringVar(&a.CredsFile, "creds", "", "NATS credentials `file`")
	fs.StringVar(&a.CAFile, "tls-ca", "", "PEM `file` of the roots that verify the server")
	fs.StringVar(&a.CertFile, "tls-cert", "", "client certificate `file`")
	fs.StringVar(&a.KeyFile, "tls-key", "", "client key `file`")
	fs.StringVar(&a.ServerName, "tls-server-name", "", "name to verify in the server's certificate")
	return &a
}

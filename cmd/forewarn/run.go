package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"
	"time"

	"golang.org/x/term"

	"forewarn/config"
	"forewarn/engine/series"
	"forewarn/state"
	"forewarn/stream"
	"forewarn/stream/daemon"
	"forewarn/stream/demo"
	"forewarn/stream/source"
	"forewarn/stream/web"
)

func init() {
	register("run", "run the daemon (embedded NATS server unless --nats is given)", runDaemon)
}

// runDaemon reads flags and config, builds the parts, runs them and waits
// for SIGINT or SIGTERM.
func runDaemon(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("run", flag.ContinueOnError)
	fs.SetOutput(stderr)
	cfgFile := fs.String("config", "", "YAML configuration `file`")
	// The overriding flags are read back with fs.Visit, so that only
	// flags given on the command line override the file.
	fs.String("data", "", "state `directory` (overrides state.dir)")
	fs.String("nats", "", "external NATS `URL` (overrides nats.url; empty: embedded server)")
	fs.String("listen-nats", "", "embedded NATS server `host:port` (overrides nats.listen)")
	fs.String("http", "", "HTTP `host:port` (overrides http.listen; empty: off)")
	demoOn := fs.Bool("demo", false, "add the built-in simulated publisher and print a line per forecast and alert")
	if err := fs.Parse(args); err != nil {
		return exitUsage
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "forewarn run: unexpected argument %q\n", fs.Arg(0))
		return exitUsage
	}
	cfg := config.Default()
	if *cfgFile != "" {
		c, err := config.Load(*cfgFile)
		if err != nil {
			fmt.Fprintf(stderr, "forewarn run: %v\n", err)
			return exitUsage
		}
		cfg = c
	}
	var ov config.Overrides
	fs.Visit(func(f *flag.Flag) {
		v := f.Value.String()
		switch f.Name {
		case "data":
			ov.StateDir = &v
		case "nats":
			ov.NATSURL = &v
		case "listen-nats":
			ov.NATSListen = &v
		case "http":
			ov.HTTPListen = &v
		}
	})
	var shopLn net.Listener
	if *demoOn {
		// The demo's scraped source: a simulated endpoint of our own on
		// a free loopback port.
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			fmt.Fprintf(stderr, "forewarn run: demo endpoint: %v\n", err)
			return exitFailure
		}
		defer ln.Close()
		shopLn = ln
		cfg.Sources = append(cfg.Sources, demo.ShopSource("http://"+ln.Addr().String()+"/metrics"))
		cfg.Series = append(append(demo.Series(), demo.ShopSeries()), cfg.Series...)
		cfg.Alerts = append(demo.Alerts(), cfg.Alerts...)
		cfg.Limits = demo.Limits(cfg.Limits)
	}
	cfg, err := cfg.Override(ov)
	if err != nil {
		fmt.Fprintf(stderr, "forewarn run: %v\n", err)
		return exitUsage
	}
	log := newLogger(cfg.Log, stderr)
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if err := serve(ctx, cfg, log, *demoOn, shopLn, stdout); err != nil {
		log.Error("forewarn stopped", "err", err)
		return exitFailure
	}
	return exitOK
}

// serve runs the daemon until ctx ends. Shutdown is ordered: the daemon
// stops its intake, finishes refits, writes the state; then the HTTP
// listener, the bus connection and the embedded server close, and the
// state file last.
func serve(ctx context.Context, cfg *config.Config, log *slog.Logger, demoOn bool, shopLn net.Listener, stdout io.Writer) error {
	if err := os.MkdirAll(cfg.State.Dir, 0o700); err != nil {
		return fmt.Errorf("state directory: %w", err)
	}
	store, err := state.Open(cfg.State.Dir)
	if err != nil {
		return err
	}
	defer store.Close()

	url := cfg.NATS.URL
	if url == "" {
		srv, u, err := stream.StartEmbedded(stream.EmbeddedOptions{
			Listen:     cfg.NATS.Listen,
			StoreDir:   filepath.Join(cfg.State.Dir, "bus"),
			SyncAlways: cfg.NATS.SyncAlways,
		})
		if err != nil {
			return err
		}
		defer func() {
			srv.Shutdown()
			srv.WaitForShutdown()
		}()
		url = u
		log.Info("embedded NATS server running", "url", url)
	}
	nc, err := stream.Connect(url, stream.Auth{
		User: cfg.NATS.User, Password: cfg.NATS.Password, Token: cfg.NATS.Token,
		NKeySeedFile: cfg.NATS.NKeySeedFile, CredsFile: cfg.NATS.CredsFile,
		CAFile: cfg.NATS.TLS.CAFile, CertFile: cfg.NATS.TLS.CertFile, KeyFile: cfg.NATS.TLS.KeyFile,
		ServerName: cfg.NATS.TLS.ServerName, InsecureSkipVerify: cfg.NATS.TLS.InsecureSkipVerify,
	}, "forewarn")
	if err != nil {
		return err
	}
	defer nc.Close()

	opt := daemon.Options{Config: cfg, Conn: nc, Store: store, Logger: log}
	if demoOn {
		opt.OnForecast = func(f *series.Forecast) { fmt.Fprintln(stdout, demo.ForecastLine(f)) }
		opt.OnAlert = func(e *series.AlertEvent) { fmt.Fprintln(stdout, demo.AlertLine(e)) }
	}
	// Cluster mode: the cluster intake is built here (daemon.New would
	// build the same) so that the sources scrape by its leases too.
	var owns func(*config.Source) bool
	if cfg.Cluster.Partitions > 0 {
		pi, err := stream.NewClusterIntake(nc, cfg.WithDefaults(), log)
		if err != nil {
			return err
		}
		opt.Intake, opt.Owns = pi, pi.OwnsTopic
		owns = source.ByPartition(cfg.Cluster.Partitions, pi.Owned)
	}
	d, err := daemon.New(opt)
	if err != nil {
		return err
	}

	var sources *source.Runner
	if len(cfg.Sources) > 0 {
		sources, err = source.New(source.Options{Sources: cfg.Sources, Conn: nc, Prefix: demoPrefix(cfg),
			MaxSeries: cfg.Limits.MaxSeries, Logger: log, Owns: owns})
		if err != nil {
			return err
		}
		d.Metrics().Registry.MustRegister(sources.Metrics().Collectors()...)
	}
	if shopLn != nil {
		hs := &http.Server{Handler: demo.NewPrintShop(), ReadHeaderTimeout: 5 * time.Second}
		go hs.Serve(shopLn)
		defer hs.Close()
	}

	if cfg.HTTP.Listen != "" {
		ln, err := net.Listen("tcp", cfg.HTTP.Listen)
		if err != nil {
			return fmt.Errorf("http listener: %w", err)
		}
		hs := &http.Server{Handler: web.Handler(d, cfg), ReadHeaderTimeout: 5 * time.Second}
		go hs.Serve(ln)
		defer func() {
			sctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
			defer cancel()
			hs.Shutdown(sctx)
		}()
		log.Info("HTTP listening", "addr", ln.Addr().String())
	}

	runErr := make(chan error, 1)
	go func() { runErr <- d.Run(ctx) }()
	demoDone := make(chan error, 1)
	if demoOn {
		select {
		case <-d.Ready():
		case err := <-runErr:
			return err
		}
		go func() { demoDone <- demo.Run(ctx, nc, demoPrefix(cfg)) }()
		log.Info("demo publisher running", "topics", "release.downloads storage.vol1.used_bytes shop.orders")
	}
	sourcesDone := make(chan struct{})
	sctx, stopSources := context.WithCancel(ctx)
	defer stopSources()
	if sources != nil {
		go func() {
			defer close(sourcesDone)
			select {
			case <-d.Ready():
			case <-sctx.Done():
				return
			}
			sources.Run(sctx)
		}()
		log.Info("scraping sources", "count", len(cfg.Sources))
	} else {
		close(sourcesDone)
	}
	err = <-runErr
	stopSources()
	<-sourcesDone
	if demoOn {
		if derr := <-demoDone; derr != nil && err == nil && !errors.Is(derr, context.Canceled) {
			err = derr
		}
	}
	return err
}

// demoPrefix is the literal prefix of the first intake subject: where the
// demo and the sources publish.
func demoPrefix(cfg *config.Config) string {
	if p := cfg.Prefixes(); len(p) > 0 {
		return p[0]
	}
	return "metrics."
}

// newLogger builds the slog logger: text on a terminal, JSON otherwise,
// unless the config says which.
func newLogger(c config.Log, w io.Writer) *slog.Logger {
	var level slog.Level
	switch strings.ToLower(c.Level) {
	case "debug":
		level = slog.LevelDebug
	case "warn":
		level = slog.LevelWarn
	case "error":
		level = slog.LevelError
	default:
		level = slog.LevelInfo
	}
	format := c.Format
	if format == "" || format == "auto" {
		format = "json"
		if f, ok := w.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
			format = "text"
		}
	}
	o := &slog.HandlerOptions{Level: level}
	if format == "text" {
		return slog.New(slog.NewTextHandler(w, o))
	}
	return slog.New(slog.NewJSONHandler(w, o))
}

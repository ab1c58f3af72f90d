// Package e2e holds black-box end-to-end tests of the forewarn binary.
//
// The tests build cmd/forewarn once (TestMain), run it as a separate
// process and talk to it only through what CONTRACT.md promises: command
// line flags, YAML configuration keys, NATS subjects, JSON messages, the
// HTTP health endpoints and the offline commands (fit, query, state). They
// import nothing from the project.
//
// The bus is either an in-process NATS server started by the test
// (github.com/nats-io/nats-server/v2, random port, JetStream, store in a
// temporary directory), given to the daemon with --nats, or the daemon's
// own embedded server on a free port (--listen-nats), which the test then
// connects to.
//
// What is checked:
//
//   - a restart (SIGTERM, same --data) gives, after the restart, forecasts
//     identical to an uninterrupted run's (issue 4);
//   - repeated kill -9 loses no observation and applies none twice: the
//     final state records and forecasts equal an uninterrupted run's
//     (issue 6); FOREWARN_CRASH_FULL=1 runs the full 200 000-observation
//     size, the default run a reduced one;
//   - hostile input gets the expected reject codes and leaves a good
//     series' forecasts untouched (issue 6);
//   - a capacity alert is raised once, with its eta, survives a restart
//     without repeating, and is cleared (issue 5);
//   - 200 gauges near the threshold of a 2-hour rule (120 steps) raise and
//     clear once each across a SIGTERM restart that takes at most 5 s
//     (issue 14);
//   - the streamed forecast at the last bucket equals forewarn fit on the
//     same window, and R's predict within the engine's tolerances (issue 4);
//   - three instances with cluster.partitions: 8 on an in-process 3-node
//     NATS cluster (kill -9 of one, a fourth joining, SIGSTOP past the
//     lease, a NATS node restarted) end with every state record and
//     forecast equal to one instance's, and a paused former owner's late
//     output recognisable by its epoch header (issue 15);
//   - the demo prints forecast lines and an alert raised and cleared, each
//     line of exactly one of its two shapes; forewarn query answers.
//
// Forecasts at one origin: a run without SIGKILL publishes each origin
// once; after a SIGKILL an origin may be published again, byte-identical
// apart from "issued" (forecastsByOrigin, harness_test.go, states why).
//
// Data times start at t0, midnight UTC thirty days before the run, inside
// arrival-time limits the tests set tight (harness_test.go), so the suite
// does not age.
//
// The spelling of the formats the tests read (forecast messages, alert
// state words, a fixed model in the config, forewarn fit's flags and JSON)
// lives in wire_test.go alone.
//
// TestDemo waits on events only (the lines it reads, the process's exit),
// with go test's -timeout as the backstop. The other tests still poll for
// their messages with generous limits (eventually, waitConsumed:
// 30 s to 3 min), which fail the test if exceeded.
//
// The package has no non-test code; this file only documents it.
package e2e

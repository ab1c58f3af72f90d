// Package streamtest runs in-process NATS servers for tests and benchmarks
// of forewarn's bus code, and measures the raw core-NATS
// publish→subscribe rate that the daemon's benchmarks are compared with.
//
// Every server listens on a random loopback port with JetStream on, its
// store in tb.TempDir(), logging and signal handling off, and is shut down
// by tb.Cleanup.
package streamtest

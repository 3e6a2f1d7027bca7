// Package faulttest holds the farm's process-level fault and load tests.
// Each test runs the soak binary as separate processes on loopback (or in
// a network namespace of its own): `soak broker` for NATS with JetStream,
// `soak scheduler`, and `soak worker`s; it then kills, freezes, cuts off
// or overloads them and checks from the job records, the event streams
// and the workers' logs that every job ends exactly once. The package has
// no code of its own outside its tests.
package faulttest

// Package stress holds the one switch of the heavy tests: the environment
// variable HOPWISE_STRESS. With HOPWISE_STRESS=1 the reliability suites run
// their large variants, and the measurements that take minutes (build
// speed-up, router latency profile, telemetry overhead, large benchmark
// indexes) run instead of skipping. DEVELOPERS.md lists what it turns on.
//
// Every other test knob is a flag of the package's tests (-update to
// rewrite golden files, and a few measurement settings), and quick runs use
// testing.Short. Safe for concurrent use.
package stress

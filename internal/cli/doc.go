// Package cli implements the hopwise command line. Each command lives in its
// own file and registers itself with register in an init function.
//
// Concurrency: NewRoot builds a fresh command tree with its own flags on
// every call, so separate trees may run concurrently (the tests do); one
// tree runs one command at a time.
package cli

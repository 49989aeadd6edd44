// Package jsonkeys holds the small pieces the strict JSON readers share
// (router config files, plain outcome files): matching an object key to
// the known field names exactly, with a case variant told apart from an
// unknown key, and wording decoder tokens and errors for people without Go
// type names. encoding/json alone matches keys case-insensitively and keeps
// the last of two, which lets one garbled or hostile line change a value
// silently. The functions are pure and safe for concurrent use.
package jsonkeys

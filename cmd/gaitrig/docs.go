package main

// jsonResults maps each command that has --json to the Go type of the
// document it prints. docs/cli.md documents each type's fields (generated
// by TestCLIReference in reference_test.go; run `go generate ./cmd/gaitrig` to refresh it), and
// a test requires every command with a --json flag to be listed here.
var jsonResults = map[string]any{}

//go:generate go test -run TestCLIReference -update

// Package golden holds sawmill's golden cases (testdata, one folder per
// case) and the test that runs each through every target's verify.Runner:
// `go test ./golden` runs them, `-update` rewrites the snapshots that
// differ, and a snapshot no case produced fails. It has no code outside its
// tests; the verifier users run is package verify.
package golden

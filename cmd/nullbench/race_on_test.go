//go:build race

package main

// raceDetector: the tests run under -race, which slows every exchange
// and computation of the simulated bench many times over.
const raceDetector = true

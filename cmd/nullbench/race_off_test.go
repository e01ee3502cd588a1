//go:build !race

package main

// raceDetector: the tests run without -race.
const raceDetector = false

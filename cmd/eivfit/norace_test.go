package main

// raceEnabled is set under the race detector, where the memory test and
// the tests that run servers as processes are skipped (the instrumented
// binary is several times slower, and what they test is not a data race).
var raceEnabled bool

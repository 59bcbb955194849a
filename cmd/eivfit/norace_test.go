package main

// raceEnabled is set under the race detector, where the memory test is skipped.
var raceEnabled bool

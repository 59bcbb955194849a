package api

// raceEnabled is set under the race detector, where the browser test is skipped.
var raceEnabled bool

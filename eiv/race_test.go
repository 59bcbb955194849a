//go:build race

package eiv_test

func init() { raceEnabled = true }

//go:build race

package eiv

func init() { pbRace = true }

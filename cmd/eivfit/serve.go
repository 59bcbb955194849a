package main

import (
	"context"
	"fmt"
	"io"
)

func runServe(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fmt.Fprintln(stderr, "eivfit serve: the HTTP service is not built yet")
	return exitError{2}
}

// Command eivfit fits straight lines when both x and y are measured: the
// fit subcommand on the command line, the serve subcommand as a JSON HTTP
// service. Both run the same engine and print the same JSON.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
)

// version and revision are set at build time with -ldflags
// "-X main.version=$(git describe --tags --always --dirty) -X main.revision=$(git rev-parse HEAD)"
// (README, deploy/Dockerfile); without them the go command's VCS stamp is
// used when there is one (see buildVersion).
var (
	version  = "dev"
	revision = ""
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	err := run(ctx, os.Args[1:], os.Stdin, os.Stdout, os.Stderr)
	stop()
	if err != nil {
		var ee exitError
		if errors.As(err, &ee) {
			os.Exit(ee.code)
		}
		fmt.Fprintln(os.Stderr, "eivfit:", err)
		os.Exit(1)
	}
}

// exitError carries an exit status for a failure already reported on stderr.
type exitError struct{ code int }

func (e exitError) Error() string { return fmt.Sprintf("exit status %d", e.code) }

const usage = `eivfit fits straight lines when both x and y carry measurement error.

Usage:
  eivfit fit [flags] FILE     fit a CSV file (FILE "-" reads standard input)
  eivfit compare [flags] FILE run a method-comparison study on a CSV file
  eivfit calibrate [flags] FILE calibrate against standards and evaluate unknowns
  eivfit plan [flags] [FILE]  plan a method-comparison study by simulation
  eivfit serve [flags]        run the HTTP service
  eivfit studies list|show|verify|export  read, check and export saved studies
  eivfit bench [flags]        time the engine against scipy.odr and numpy
  eivfit load [flags]         load-test a server on loopback
  eivfit version              print the version

fit, compare and calibrate keep the study with --save (in --data-dir, as the
server does, or on --server URL), with --label and --tag KEY=VALUE.

Run "eivfit COMMAND -h" for a command's flags.
`

func run(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return exitError{2}
	}
	switch args[0] {
	case "fit":
		return runFit(ctx, args[1:], stdin, stdout, stderr)
	case "compare":
		return runCompare(ctx, args[1:], stdin, stdout, stderr)
	case "calibrate":
		return runCalibrate(ctx, args[1:], stdin, stdout, stderr)
	case "plan":
		return runPlan(ctx, args[1:], stdin, stdout, stderr)
	case "serve":
		return runServe(ctx, args[1:], stdout, stderr)
	case "studies":
		return runStudies(ctx, args[1:], stdout, stderr)
	case "bench":
		return runBench(ctx, args[1:], stdout, stderr)
	case "load":
		return runLoad(ctx, args[1:], stdout, stderr)
	case "version", "--version", "-version":
		v, rev := buildVersion()
		if rev != "" {
			v += " (" + rev + ")"
		}
		fmt.Fprintln(stdout, "eivfit", v)
		return nil
	case "help", "-h", "--help":
		fmt.Fprint(stdout, usage)
		return nil
	}
	fmt.Fprintf(stderr, "eivfit: unknown command %q\n\n%s", args[0], usage)
	return exitError{2}
}

// Command cohortdesk runs the cohort review dashboard for remote heart-rhythm
// screening studies: the demo on a private PostgreSQL it starts itself, the
// production server against DATABASE_URL, migrations, and the tools around them.
//
// Run `cohortdesk help` for the commands.
package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if err := run(ctx, os.Args[1:], os.Getenv, os.Stdout, os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "cohortdesk:", err)
		os.Exit(1)
	}
}

// command is one subcommand of the binary.
type command struct {
	name  string
	usage string
	run   func(ctx context.Context, e env, args []string) error
}

// env is what a command may touch of the outside world.
type env struct {
	getenv func(string) string
	stdout io.Writer
	stderr io.Writer
}

func commands() []command {
	return []command{
		{"demo", "run the app with a fictional cohort on a private PostgreSQL it starts itself", runDemo},
		{"serve", "run the app against DATABASE_URL (production)", runServe},
		{"migrate", "apply database migrations (up) or list them (status) on DATABASE_URL", runMigrate},
		{"import", "import wear-data files (readings CSV, FHIR R4 Bundles) into DATABASE_URL", runImport},
		{"example-data", "write the fictional study's wear data as a readings CSV (to try the importer)", runExampleData},
		{"screen", "screen stored wear data again with a chosen protocol version, showing progress", runScreen},
		{"user", "add a staff account (e.g. the first administrator), reset a password, list accounts", runUser},
		{"healthcheck", "probe a running server (for container health checks)", runHealthcheck},
		{"bench", "measure import, screening and page load on a synthetic study, each against a baseline in the same run", runBench},
		{"ecg-check", "run the beat detector over a folder of annotated WFDB records; print sensitivity and positive predictivity", runECGCheck},
	}
}

func run(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	e := env{getenv: getenv, stdout: stdout, stderr: stderr}
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		usage(stdout)
		return nil
	}
	for _, c := range commands() {
		if c.name == args[0] {
			return c.run(ctx, e, args[1:])
		}
	}
	usage(stderr)
	return fmt.Errorf("unknown command %q", args[0])
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "usage: cohortdesk <command> [flags]\n\ncommands:")
	for _, c := range commands() {
		fmt.Fprintf(w, "  %-12s %s\n", c.name, c.usage)
	}
	fmt.Fprintln(w, "\nRun `cohortdesk <command> -h` for a command's flags.")
}

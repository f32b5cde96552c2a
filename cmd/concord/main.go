// Command concord runs crowd-labelling jobs for image datasets: it serves the
// labelling and lead web app, migrates the database, imports images, analyses
// votes and exports releases. main only wires; run holds the logic so tests
// can drive the whole binary.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"strings"
	"syscall"
)

// version is set at build time with -ldflags "-X main.version=...".
var version = "dev"

// env is what every subcommand gets from the outside world. Tests build one
// with buffers and a fake environment.
type env struct {
	stdout io.Writer
	stderr io.Writer
	stdin  io.Reader
	getenv func(string) string
	logger *slog.Logger
}

// command is one subcommand of the binary.
type command struct {
	name    string
	summary string
	run     func(ctx context.Context, e *env, args []string) error
}

func commands() []command {
	return []command{
		{"serve", "run the web app (migrates the database up first)", runServe},
		{"demo", "build the recycling-plant demo project, simulate a crowd, and serve it", runDemo},
		{"migrate", "migrate the database schema: up, down or status", runMigrate},
		{"taxonomy", "check, import, show or export a label taxonomy", runTaxonomy},
		{"project", "create or list projects", runProject},
		{"user", "add a user (lead or labeller)", runUser},
		{"import", "import images into a project from a folder or manifest CSV", runImport},
		{"release", "export a consensus release with train/validation/test splits", runRelease},
		{"agree", "analyse a votes CSV: consensus, kappa, alpha, labeller reliability", runAgree},
		{"simulate", "compare vote policies on a simulated crowd with known truth", runSimulate},
		{"loadtest", "drive the HTTP labelling endpoints with simulated labellers", runLoadtest},
		{"version", "print the version", runVersion},
	}
}

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	e := &env{
		stdout: os.Stdout,
		stderr: os.Stderr,
		stdin:  os.Stdin,
		getenv: os.Getenv,
	}
	e.logger = newLogger(os.Stderr, os.Getenv("CONCORD_LOG_LEVEL"), os.Getenv("CONCORD_LOG_FORMAT"))
	err := run(ctx, e, os.Args[1:])
	var ue usageError
	switch {
	case err == nil:
	case errors.Is(err, flag.ErrHelp):
	case errors.As(err, &ue):
		fmt.Fprintln(os.Stderr, "concord:", err)
		os.Exit(2)
	default:
		fmt.Fprintln(os.Stderr, "concord:", err)
		os.Exit(1)
	}
}

// usageError marks a mistake in how the command was called (exit status 2).
type usageError struct{ msg string }

func (u usageError) Error() string { return u.msg }

func usagef(format string, a ...any) error { return usageError{fmt.Sprintf(format, a...)} }

func run(ctx context.Context, e *env, args []string) error {
	if e.logger == nil {
		e.logger = slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	if e.getenv == nil {
		e.getenv = func(string) string { return "" }
	}
	if e.stdin == nil {
		e.stdin = strings.NewReader("")
	}
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		printUsage(e.stdout)
		if len(args) == 0 {
			return usagef("no command given")
		}
		return nil
	}
	for _, c := range commands() {
		if c.name == args[0] {
			return c.run(ctx, e, args[1:])
		}
	}
	printUsage(e.stderr)
	return usagef("unknown command %q", args[0])
}

func printUsage(w io.Writer) {
	fmt.Fprintln(w, "Usage: concord COMMAND [flags]")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Commands:")
	cs := commands()
	for _, c := range cs {
		fmt.Fprintf(w, "  %-10s %s\n", c.name, c.summary)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Run 'concord COMMAND --help' for a command's flags.")
	fmt.Fprintln(w, "Environment: DATABASE_URL (default: PostgreSQL on 127.0.0.1:5432, else a private cluster), CONCORD_* for flags.")
}

// newFlagSet makes a flag set whose --help prints a usage line and the flags,
// and whose defaults can be overridden by CONCORD_<FLAG> environment variables
// (applied by parseFlags).
func newFlagSet(e *env, name, usage string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "Usage: concord %s\n\nFlags:\n", usage)
		fs.PrintDefaults()
	}
	return fs
}

// parseFlags fills fs from CONCORD_<NAME> environment variables (dashes become
// underscores) and then from args, so the command line wins.
func parseFlags(e *env, fs *flag.FlagSet, args []string) error {
	var envErr error
	fs.VisitAll(func(f *flag.Flag) {
		key := "CONCORD_" + strings.ToUpper(strings.ReplaceAll(f.Name, "-", "_"))
		if v := e.getenv(key); v != "" && envErr == nil {
			if err := f.Value.Set(v); err != nil {
				envErr = usagef("%s=%q: %v", key, v, err)
			}
		}
	})
	if envErr != nil {
		return envErr
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return usageError{err.Error()}
	}
	return nil
}

func newLogger(w io.Writer, level, format string) *slog.Logger {
	var lv slog.Level
	if err := lv.UnmarshalText([]byte(level)); err != nil || level == "" {
		lv = slog.LevelInfo
	}
	opts := &slog.HandlerOptions{Level: lv}
	if format == "json" {
		return slog.New(slog.NewJSONHandler(w, opts))
	}
	return slog.New(slog.NewTextHandler(w, opts))
}

func runVersion(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "version", "version")
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	fmt.Fprintln(e.stdout, "concord", version)
	return nil
}

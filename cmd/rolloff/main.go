// Command rolloff measures the frequency response of an amplifier, filter
// or preamp on a SCPI bench, unattended, and exports a report-grade result.
//
// Each subcommand lives in its own file and registers itself with
// register; main parses the global flags, sets up logging and dispatches.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"syscall"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/rs/zerolog"
)

// command is one rolloff subcommand.
type command struct {
	name    string
	summary string // one line for the usage list
	// run executes the subcommand with its own arguments. The context is
	// cancelled on SIGINT/SIGTERM. A returned error is printed and makes
	// the exit status non-zero.
	run func(ctx context.Context, env *cmdEnv, args []string) error
}

// cmdEnv is what every subcommand receives.
type cmdEnv struct {
	log    zerolog.Logger
	stdout io.Writer
	stderr io.Writer
	stdin  io.Reader
	tty    bool // stderr is a terminal
}

var commands = map[string]*command{}

func register(c *command) {
	if c.name == "" || commands[c.name] != nil {
		panic("rolloff: bad or duplicate command " + c.name)
	}
	commands[c.name] = c
}

// exitError carries a specific exit status.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

func usage(w io.Writer) {
	fmt.Fprintf(w, "usage: rolloff [--log-level LEVEL] COMMAND [ARGS]\n\ncommands:\n")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-9s %s\n", n, commands[n].summary)
	}
	fmt.Fprintf(w, "\nRun 'rolloff COMMAND -h' for a command's options.\n")
}

// newLogger returns a console logger on a terminal, JSON lines otherwise.
func newLogger(w io.Writer, tty bool, level zerolog.Level) zerolog.Logger {
	var out io.Writer = w
	if tty {
		out = zerolog.ConsoleWriter{Out: w, TimeFormat: time.TimeOnly}
	}
	return zerolog.New(out).Level(level).With().Timestamp().Logger()
}

func main() {
	os.Exit(realMain(os.Args[1:], os.Stdin, os.Stdout, os.Stderr))
}

func realMain(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("rolloff", flag.ContinueOnError)
	fs.SetOutput(stderr)
	logLevel := fs.String("log-level", "info", "log level: trace, debug, info, warn, error")
	fs.Usage = func() { usage(stderr) }
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	level, err := zerolog.ParseLevel(*logLevel)
	if err != nil || *logLevel == "" {
		fmt.Fprintf(stderr, "rolloff: --log-level %q: want one of trace, debug, info, warn, error\n", *logLevel)
		return 2
	}
	if fs.NArg() == 0 {
		usage(stderr)
		return 2
	}
	name := fs.Arg(0)
	c := commands[name]
	if c == nil {
		fmt.Fprintf(stderr, "rolloff: unknown command %q\n\n", name)
		usage(stderr)
		return 2
	}
	tty := false
	if f, ok := stderr.(*os.File); ok {
		tty = isatty.IsTerminal(f.Fd())
	}
	env := &cmdEnv{log: newLogger(stderr, tty, level), stdout: stdout, stderr: stderr, stdin: stdin, tty: tty}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if err := c.run(ctx, env, fs.Args()[1:]); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		fmt.Fprintf(stderr, "rolloff %s: %v\n", name, err)
		var ee *exitError
		if errors.As(err, &ee) {
			return ee.code
		}
		return 1
	}
	return 0
}

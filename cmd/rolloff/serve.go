package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"runtime/debug"
	"time"

	"rolloff/driver/bench"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/queue"
	"rolloff/sweep/store"
	"rolloff/web"
)

func init() {
	register(&command{
		name:    "serve",
		summary: "run the daemon: the bench's run queue, its API and its page",
		run:     runServe,
	})
	demoServe = serveDemo
}

// serveDemo serves the live page for the demo over its bench and store,
// and runs the demo plan through the daemon's queue so that the page can
// steer it like any run it started.
func serveDemo(ctx context.Context, env *cmdEnv, b *bench.Bench, st *store.Store, addr string, p *plan.Plan, planData []byte, compare func(map[string]any) error) error {
	srv, err := web.New(web.Config{Addr: addr, Bench: b, Store: st, Log: env.log, Version: serveVersion()})
	if err != nil {
		return err
	}
	fmt.Fprintf(env.stdout, "live page: %s\n", srv.URL())
	if srv.Token() != "" {
		fmt.Fprintf(env.stdout, "one-time page link: %s\n", srv.OnceURL())
	}
	served := make(chan error, 1)
	go func() { served <- srv.Serve(ctx) }()
	start := time.Now()
	id, err := srv.Queue().Submit(ctx, p, queue.Source{Name: demoPlanFile, Data: planData})
	if err != nil {
		env.log.Error().Err(err).Msg("demo sweep not started")
		return errors.Join(err, <-served)
	}
	if err := reportQueued(ctx, env, srv.Queue(), st, id, start, compare); err != nil {
		env.log.Error().Err(err).Msg("demo sweep")
	}
	if ctx.Err() == nil {
		fmt.Fprintf(env.stdout, "serving the live page until interrupted\n")
	}
	return <-served
}

// reportQueued waits for a queued run to end and prints it as
// sweepAndReport does.
func reportQueued(ctx context.Context, env *cmdEnv, q *queue.Queue, st *store.Store, id string, start time.Time, compare func(map[string]any) error) error {
	tick := time.NewTicker(100 * time.Millisecond)
	defer tick.Stop()
	var info queue.Info
	for {
		var err error
		if info, err = q.Get(id); err != nil {
			return err
		}
		if info.State.Ended() {
			break
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-tick.C:
		}
	}
	fmt.Fprintf(env.stdout, "run %s: %s\n", id, filepath.Join(st.Dir(), id))
	if info.State != event.Done {
		return fmt.Errorf("run %s ended %s: %s", id, info.State, info.Message)
	}
	return reportDone(env, info.Points, time.Since(start), info.Result, compare)
}

func runServe(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("serve", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	benchPath := fs.String("bench", "", "bench profile file (TOML), or \"demo\" for the built-in simulated bench")
	addr := fs.String("addr", web.DefaultAddr, "listen address host:port; any other than loopback requires a token")
	data := fs.String("data", "", "run store directory (default: the daemon's data directory)")
	token := fs.String("token", "", "access token required on every API request (default: none on loopback, generated otherwise)")
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff serve --bench BENCH [--addr %s] [--data DIR] [--token T]\n\n", web.DefaultAddr)
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		fs.Usage()
		return &exitError{code: 2, err: fmt.Errorf("unexpected argument %q", fs.Arg(0))}
	}
	if *benchPath == "" {
		fs.Usage()
		return &exitError{code: 2, err: errors.New("--bench is required (a bench profile file, or \"demo\")")}
	}
	if *token == "" {
		*token = os.Getenv("ROLLOFF_TOKEN")
	}
	dir := *data
	if dir == "" {
		d, err := store.DefaultDaemonDir()
		if err != nil {
			return fmt.Errorf("--data: %w", err)
		}
		dir = d
	}
	st, err := store.Open(dir)
	if err != nil {
		return fmt.Errorf("--data %s: %w", dir, err)
	}
	st.SetLogger(env.log)

	var b *bench.Bench
	if *benchPath == "demo" {
		b, err = bench.OpenDemo(ctx, env.log)
	} else {
		cfg, lerr := bench.Load(*benchPath)
		if lerr != nil {
			return fmt.Errorf("--bench: %w", lerr)
		}
		b, err = bench.Open(ctx, cfg, env.log)
	}
	if err != nil {
		return fmt.Errorf("--bench %s: %w", *benchPath, err)
	}
	defer b.Close()

	srv, err := web.New(web.Config{Addr: *addr, Token: *token, Bench: b, Store: st, Log: env.log, Version: serveVersion()})
	if err != nil {
		return err
	}
	fmt.Fprintf(env.stdout, "rolloff serving %s\n", srv.URL())
	if srv.Token() != "" {
		fmt.Fprintf(env.stdout, "access token (header %s): %s\n", web.TokenHeader, srv.Token())
		fmt.Fprintf(env.stdout, "one-time page link: %s\n", srv.OnceURL())
	}
	start := time.Now()
	err = srv.Serve(ctx)
	env.log.Info().Dur("up", time.Since(start)).Msg("daemon stopped")
	return err
}

// serveVersion is the build's version for the page's footer.
func serveVersion() string {
	if bi, ok := debug.ReadBuildInfo(); ok && bi.Main.Version != "" {
		return bi.Main.Version
	}
	return "(devel)"
}

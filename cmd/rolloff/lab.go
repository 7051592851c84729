package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"os"

	"rolloff/web/lab"
)

func init() {
	register(&command{
		name:    "lab",
		summary: "serve a read-only overview of every bench publishing to an MQTT broker",
		run:     runLab,
	})
}

func runLab(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("rolloff lab", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	bf := addBrokerFlags(fs, false)
	addr := fs.String("addr", lab.DefaultAddr, "listen address host:port; any other than loopback requires a token")
	token := fs.String("token", "", "access token for the page (default: none on loopback, generated otherwise; or $ROLLOFF_LAB_TOKEN)")
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff lab --broker mqtt://HOST:PORT [--addr %s] [--broker-ca FILE] [--broker-user U --broker-password-file F]\n\n"+
			"Shows every bench that publishes to the broker: its status, its current run's\n"+
			"progress and plot, its recent results. Read-only: a bench is steered only\n"+
			"through its own daemon.\n\n", lab.DefaultAddr)
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		fs.Usage()
		return &exitError{code: 2, err: fmt.Errorf("unexpected argument %q", pos[0])}
	}
	b, ok, err := bf.broker()
	if err != nil {
		return err
	}
	if !ok {
		fs.Usage()
		return &exitError{code: 2, err: errors.New("--broker is required (mqtt://HOST:PORT or mqtts://HOST:PORT)")}
	}
	if *token == "" {
		*token = os.Getenv("ROLLOFF_LAB_TOKEN")
	}
	l, err := lab.New(lab.Config{Broker: b, Addr: *addr, Token: *token, Version: serveVersion(), Log: env.log})
	if err != nil {
		return err
	}
	fmt.Fprintf(env.stdout, "rolloff lab serving %s (broker %s)\n", l.URL(), b.URL)
	return l.Serve(ctx)
}

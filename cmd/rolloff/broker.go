package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"time"

	"rolloff/sweep/publish"
)

// brokerFlags are the MQTT broker flags of serve, run, demo and lab.
type brokerFlags struct {
	url, ca, user, passwordFile *string
	benchID                     *string // nil for lab
}

// addBrokerFlags adds --broker, --broker-ca, --broker-user,
// --broker-password-file and, when bench is set, --bench-id.
func addBrokerFlags(fs *flag.FlagSet, bench bool) *brokerFlags {
	f := &brokerFlags{
		url:          fs.String("broker", "", "MQTT broker to publish to, mqtt://HOST:PORT or mqtts://HOST:PORT (default: none)"),
		ca:           fs.String("broker-ca", "", "PEM file of the CAs that sign the broker's certificate (mqtts; default: the system's)"),
		user:         fs.String("broker-user", "", "broker user name"),
		passwordFile: fs.String("broker-password-file", "", "file whose first line is the broker password"),
	}
	if bench {
		f.benchID = fs.String("bench-id", "", "this bench's name in the broker's topics (default: from the bench file's name)")
	}
	return f
}

// broker returns the broker settings, or ok false when --broker is not
// given (and no other broker flag either).
func (f *brokerFlags) broker() (b publish.Broker, ok bool, err error) {
	if *f.url == "" {
		if *f.ca != "" || *f.user != "" || *f.passwordFile != "" {
			return b, false, &exitError{code: 2, err: errors.New("--broker-ca, --broker-user and --broker-password-file need --broker")}
		}
		return b, false, nil
	}
	b = publish.Broker{URL: *f.url, CAFile: *f.ca, User: *f.user}
	if *f.passwordFile != "" {
		if b.Password, err = publish.ReadPasswordFile(*f.passwordFile); err != nil {
			return b, false, fmt.Errorf("--broker-password-file: %w", err)
		}
	}
	if err := b.Check(); err != nil {
		return b, false, &exitError{code: 2, err: fmt.Errorf("--broker: %w", err)}
	}
	if _, err := b.ClientOptions("check"); err != nil {
		return b, false, &exitError{code: 2, err: err}
	}
	return b, true, nil
}

// startPublisher starts publishing the runs of storeDir when --broker
// is given (recent: see publish.Config.Recent); the bench id, when
// --bench-id is not given, comes from the bench file's name. stop flushes for at most
// flush, marks the bench offline and disconnects; it is a no-op without
// a broker.
func (f *brokerFlags) startPublisher(env *cmdEnv, storeDir, benchFile string, recent int) (stop func(flush time.Duration), err error) {
	b, ok, err := f.broker()
	if err != nil || !ok {
		return func(time.Duration) {}, err
	}
	id := *f.benchID
	if id == "" {
		id = publish.BenchIDFromFile(benchFile)
	}
	if err := publish.CheckBenchID(id); err != nil {
		return nil, &exitError{code: 2, err: fmt.Errorf("--bench-id: %w", err)}
	}
	p, err := publish.Start(publish.Config{Broker: b, BenchID: id, StoreDir: storeDir, Recent: recent, Version: serveVersion(), Log: env.log})
	if err != nil {
		return nil, err
	}
	env.log.Info().Str("broker", b.URL).Str("bench_id", id).Msg("publishing runs to the broker")
	return func(flush time.Duration) {
		if !p.Connected() {
			flush = min(flush, time.Second) // no broker: do not hold up the exit
		}
		ctx, cancel := context.WithTimeout(context.Background(), flush)
		defer cancel()
		if err := p.Stop(ctx); err != nil {
			env.log.Warn().Err(err).Msg("broker: not every point was acknowledged before exit; they stay in the run directory")
		}
	}, nil
}

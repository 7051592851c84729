package web_test

import (
	"context"
	"fmt"
	"log"
	"os"
	"os/signal"

	"github.com/rs/zerolog"

	"rolloff/driver/bench"
	"rolloff/sweep/store"
	"rolloff/web"
)

// ExampleNew serves the demo simulated bench on loopback until the
// program is interrupted.
func ExampleNew() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	b, err := bench.OpenDemo(ctx, zerolog.Nop())
	if err != nil {
		log.Fatal(err)
	}
	defer b.Close() // output off, sessions closed
	st, err := store.Open("runs")
	if err != nil {
		log.Fatal(err)
	}
	srv, err := web.New(web.Config{Addr: web.DefaultAddr, Bench: b, Store: st})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println("open", srv.URL())
	if err := srv.Serve(ctx); err != nil {
		log.Fatal(err)
	}
}

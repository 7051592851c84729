package main

import (
	"context"
	"fmt"
	"runtime/debug"
)

func init() {
	register(&command{name: "version", summary: "print the build's version", run: func(ctx context.Context, env *cmdEnv, args []string) error {
		v := "(devel)"
		if bi, ok := debug.ReadBuildInfo(); ok && bi.Main.Version != "" {
			v = bi.Main.Version
		}
		fmt.Fprintf(env.stdout, "rolloff %s\n", v)
		return nil
	}})
}

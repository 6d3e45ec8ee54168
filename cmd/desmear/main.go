package main

import (
	"context"
	"os"
	"os/signal"
	"syscall"
)

func main() {
	// The first SIGINT or SIGTERM cancels the context: the running command
	// stops, removes its partial output and exits with status 130. After
	// that the signals get their default action again, so a second one
	// ends the program at once.
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	go func() {
		<-ctx.Done()
		stop()
	}()
	code := run(ctx, os.Args[1:], os.Stdin, os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// Command soak computes how solid parts heat up and cool down, locally or
// on a farm of workers. Its commands live in soakfarm/internal/cli.
package main

import (
	"context"
	"os"
	"os/signal"
	"syscall"

	"soakfarm/internal/cli"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := cli.Main(ctx, os.Args[1:], os.Stdin, os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

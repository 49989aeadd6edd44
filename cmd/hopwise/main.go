// Command hopwise builds locality indexes, routes queries and analyses
// routing traces. Run "hopwise --help" for the command list.
package main

import (
	"context"
	"os"
	"os/signal"
	"syscall"

	"github.com/hopwise/hopwise/internal/cli"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := cli.Main(ctx, os.Args[1:])
	stop()
	os.Exit(code)
}

// Command simupstream serves the simulated greenhouse model (package
// simmodel) on the chat-completions wire format, as the gateway's upstream
// for trying the gateway out and for load tests.
//
//	go run ./cmd/simupstream -index ../../hopwise-demo/index.hwx -addr 127.0.0.1:9090
package main

import (
	"context"
	"errors"
	"flag"
	"log"
	"net/http"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/simmodel"
	"github.com/hopwise/hopwise/graphidx"
)

func main() {
	addr := flag.String("addr", "127.0.0.1:9090", "listen address")
	index := flag.String("index", "hopwise-demo/index.hwx", "locality index the simulated model learnt from")
	lexicon := flag.String("lexicon", "", "lexicon TSV for reading questions (default: the index's entity names)")
	seed := flag.Uint64("seed", 0, "noise seed")
	delay := flag.Duration("delay", 0, "hold every answer this long (to try upstream timeouts)")
	flag.Parse()
	ix, err := graphidx.Open(*index)
	if err != nil {
		log.Fatalf("simupstream: %v", err)
	}
	defer ix.Close()
	opt := simmodel.Options{Seed: *seed, Delay: *delay}
	if *lexicon != "" {
		if opt.Lexicon, err = graphidx.LoadLexicon(*lexicon); err != nil {
			log.Fatalf("simupstream: %v", err)
		}
	}
	m, err := simmodel.New(ix, opt)
	if err != nil {
		log.Fatalf("simupstream: %v", err)
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	hs := &http.Server{Addr: *addr, Handler: m, ReadHeaderTimeout: 5 * time.Second}
	go func() {
		<-ctx.Done()
		sctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		_ = hs.Shutdown(sctx)
	}()
	log.Printf("simupstream: serving the simulated model on http://%s/v1/chat/completions", *addr)
	if err := hs.ListenAndServe(); !errors.Is(err, http.ErrServerClosed) {
		log.Fatalf("simupstream: %v", err)
	}
}

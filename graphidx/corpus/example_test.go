package corpus_test

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
)

// A JSONL reader returns the valid contexts and, in the default lenient
// mode, skips and counts the bad lines by reason, naming the first of each.
func ExampleNewJSONLReader() {
	lines := `{"id":"c1","obs":{"vent3":"open","zone2":"humid"}}
{"id":"c2","ents":["pump1","bed4"]}
{"id":"c3","obs":{"vent3":"open","vent3":"closed"}}
not a context
`
	r := corpus.NewJSONLReader(strings.NewReader(lines), "greenhouse.jsonl")
	for {
		c, err := r.Next()
		if err != nil {
			break // io.EOF; under graphidx.Strict, the first bad line
		}
		fmt.Println(c.ID, c.Obs)
	}
	st := r.Stats()
	fmt.Println(st.Records, "records,", st.OK, "ok, skipped", st.Skipped)
	fmt.Println(st.FirstBad[graphidx.ReasonDuplicateEntity])
	// Output:
	// c1 [{vent3 open} {zone2 humid}]
	// c2 [{pump1 present} {bed4 present}]
	// 4 records, 2 ok, skipped map[bad-json:1 duplicate-entity:1]
	// greenhouse.jsonl:3: obs.vent3: duplicate-entity: "vent3"
}

// Open picks the reader from the format table by the file's extension; one
// list of options configures the reader and the builder.
func ExampleOpen() {
	dir, err := os.MkdirTemp("", "example-corpus-")
	if err != nil {
		panic(err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "beds.csv")
	csv := "context,entity,value\nc1,bed-4/probe,wet\nc2,bed-4/probe,dry\nc1,vent-3,open\nc2,vent-3,closed\n"
	if err := os.WriteFile(path, []byte(csv), 0o644); err != nil {
		panic(err)
	}
	fmt.Println(corpus.DetectFormat(path), corpus.DetectFormat("notes.md.gz"), corpus.FormatNames())

	r, closer, err := corpus.Open(path, "", "", graphidx.WithPolicy(graphidx.Strict))
	if err != nil {
		fmt.Println(err)
		return
	}
	defer closer.Close()
	sum, err := graphidx.Build(context.Background(), r, filepath.Join(dir, "beds.hwx"))
	fmt.Println(sum.Contexts, "contexts,", sum.Entities, "entities,", sum.Pairs.After, "pair,", err)

	_, _, err = corpus.Open(filepath.Join(dir, "notes.txt"), "", "")
	fmt.Println(errors.Is(err, corpus.ErrLexiconRequired))
	// Output:
	// csv text jsonl, csv or text
	// 2 contexts, 2 entities, 1 pair, <nil>
	// true
}

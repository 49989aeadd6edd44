package graphidx_test

import (
	"bytes"
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/hopwise/hopwise/graphidx"
)

// bedRow is a Source of 40 crop beds in a row; each bed's moisture
// (dry/wet) was seen together with its 3 right-hand neighbours'. It stores
// nothing per pair: Pairs generates the tables.
type bedRow struct{}

func (bedRow) Contexts() uint64 { return 100 }

func (bedRow) Entities() []graphidx.EntityRecord {
	ents := make([]graphidx.EntityRecord, 40)
	for i := range ents {
		ents[i] = graphidx.EntityRecord{Name: fmt.Sprintf("bed%02d", i), Values: []string{"dry", "wet"}, Marginal: []uint64{50, 50}}
	}
	return ents
}

func (bedRow) Pairs(fn func(graphidx.PairRecord) error) error {
	for a := range 40 {
		for b := a + 1; b <= min(a+3, 39); b++ {
			// Closer beds agree more often.
			same := uint32(10 - 2*(b-a))
			if err := fn(graphidx.PairRecord{A: uint32(a), B: uint32(b), Counts: []uint32{same, 3, 2, same}}); err != nil {
				return err
			}
		}
	}
	return nil
}

// ExampleWithWriteMemory writes the same index with the default write
// memory (the adjacency in one in-memory bucket) and with 200 bytes (16
// edges per bucket, the rest spooled to a temporary file): the files are
// identical, only the peak memory differs.
func ExampleWithWriteMemory() {
	dir, err := os.MkdirTemp("", "hopwise-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	roomy, tight := filepath.Join(dir, "roomy.hwx"), filepath.Join(dir, "tight.hwx")
	if err := graphidx.WriteFile(roomy, bedRow{}); err != nil {
		log.Fatal(err)
	}
	if err := graphidx.WriteFile(tight, bedRow{}, graphidx.WithWriteMemory(200)); err != nil {
		log.Fatal(err)
	}
	a, _ := os.ReadFile(roomy)
	b, _ := os.ReadFile(tight)
	x, err := graphidx.Open(tight)
	if err != nil {
		log.Fatal(err)
	}
	defer x.Close()
	bed, _ := x.Lookup("bed10")
	fmt.Println("pairs:", x.NumPairs(), "identical:", bytes.Equal(a, b))
	var names []string
	for _, nb := range x.RankedNeighbors(bed) {
		names = append(names, x.Name(nb))
	}
	fmt.Println("bed10 neighbours by support:", names)
	ents, _ := os.ReadDir(dir)
	fmt.Println("files left:", len(ents))
	// Output:
	// pairs: 114 identical: true
	// bed10 neighbours by support: [bed09 bed11 bed08 bed12 bed07 bed13]
	// files left: 2
}

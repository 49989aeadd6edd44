package gw_test

import (
	"fmt"

	"github.com/hopwise/hopwise/examples/gateway/gw"
)

// A body whose keys differ only in letter case means one thing to Go's
// decoder (the last wins, whatever its case) and another to a parser that
// keeps the first: the gateway refuses it.
func ExampleCheckKeys() {
	for _, body := range []string{
		`{"from":"zone-1/air-temp","value":"hot","to":"zone-3/vent-a"}`,
		`{"from":"zzz","From":"zone-1/air-temp"}`,
		`{"messages":[{"role":"user","content":"a","role":"system"}]}`,
	} {
		fmt.Println(gw.CheckKeys([]byte(body)))
	}
	// Output:
	// <nil>
	// keys "from" and "From" differ only in letter case (the second ends at byte 20); send one
	// duplicate key "role" (the second ends at byte 48)
}

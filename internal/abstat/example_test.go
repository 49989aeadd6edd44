package abstat_test

import (
	"fmt"

	"github.com/hopwise/hopwise/internal/abstat"
)

func ExampleNewcombeDiff() {
	// 56 of 70 successes in the routed arm against 48 of 80 in direct-only.
	iv, _ := abstat.NewcombeDiff(56, 70, 48, 80, 0.95)
	z, _ := abstat.TwoProportionZ(56, 70, 48, 80)
	fmt.Printf("difference %.4f, 95%% CI %.4f to %.4f, z = %.4f\n", iv.Est, iv.Lo, iv.Hi, z.Z)
	// Output: difference 0.2000, 95% CI 0.0524 to 0.3339, z = 2.6502
}

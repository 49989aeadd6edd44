package beamjob

import (
	"github.com/apache/beam/sdks/v2/go/pkg/beam"
)

// Counters returns the committed (or, where the runner does not report
// committed values, attempted) totals of the job's counters in
// MetricsNamespace, by name.
func Counters(res beam.PipelineResult) map[string]int64 {
	out := map[string]int64{}
	if res == nil {
		return out
	}
	for _, c := range res.Metrics().AllMetrics().Counters() {
		if c.Key.Namespace != MetricsNamespace {
			continue
		}
		v := c.Committed
		if v == 0 {
			v = c.Attempted
		}
		out[c.Key.Name] += v
	}
	return out
}

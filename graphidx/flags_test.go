package graphidx

import "flag"

// Flags of the measurement tests (go test ./graphidx -run X -args …, or
// after the package: go test ./graphidx -run TestBuildPeakRSS -rss-corpus F).
// They are listed in DEVELOPERS.md; everything else that is heavy runs under
// HOPWISE_STRESS=1 (internal/stress).
var (
	// update rewrites the golden writer outputs (TestGoldenIndexV3,
	// TestStreamingWriterMatchesReference) from WriteFile.
	update            = flag.Bool("update", false, "rewrite testdata/golden-v3.hwx and testdata/writer-v1.sha256 from WriteFile")
	benchCorpusFlag   = flag.String("bench-corpus", "", "TestWriteBenchCorpus: write the benchmark corpus to this file")
	benchContextsFlag = flag.Int("bench-contexts", 2_000_000, "TestWriteBenchCorpus: contexts to write")
	benchEntitiesFlag = flag.Int("bench-entities", 200_000, "TestWriteBenchCorpus: distinct entities")
	rssCorpusFlag     = flag.String("rss-corpus", "", "TestBuildPeakRSS: corpus to build while measuring the peak RSS")
	rssBudgetFlag     = flag.Int64("rss-budget", 256, "TestBuildPeakRSS: memory budget in MiB")
	rssMaxRatioFlag   = flag.Float64("rss-max-ratio", 0, "TestBuildPeakRSS: fail above this peak RSS / budget (0: report only)")
)

package graphidx

// Name prefixes of the private spill directories of Build and of the CSV
// reader; the creating process's pid follows the prefix (fileio.MakeSpillDir
// creates them and removes those of dead processes).
const (
	buildDirPrefix = "hopwise-build-"
	csvDirPrefix   = "hopwise-csv-"
)

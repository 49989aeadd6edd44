package scorer

// SetParallelHub sets which covariance assumption the parallel estimate
// uses when the bridges' table is missing (0 the average, 1 through s, 2
// through t) and returns a function restoring the previous one. Tests only.
func SetParallelHub(h int) (restore func()) {
	old := parallelHub
	parallelHub = h
	return func() { parallelHub = old }
}

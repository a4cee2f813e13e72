package sf

// FeatureMap gives transition features phi(s, a, s') in R^d. Implement it to
// plug your own features into every learner and oracle of the library.
type FeatureMap interface {
	// Dim returns d, the number of features.
	Dim() int
	// Features writes phi(s, a, next) into dst (len d). It panics if
	// len(dst) != Dim() or an index is out of range.
	Features(dst []float64, s, a, next int)
}

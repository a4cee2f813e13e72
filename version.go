package successor

// Version is the library's version. Cite it with experiment results; the
// transfer package writes it into every results file.
const Version = "0.1.0"

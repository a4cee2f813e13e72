package linalg

// GridWalk returns the transition matrix of the random walk on a rows x cols
// grid: from each cell the walker tries the four moves up, down, left and
// right with probability 1/4 each, and a move into the outer wall leaves it
// in place (so a corner cell keeps probability 1/2 on itself, an edge cell
// 1/4). Cell (r, c) is state r*cols + c. The matrix is symmetric and doubly
// stochastic, has at most five entries per row, and lower and upper
// bandwidths equal to cols. GridWalk is meant for tests and benchmarks
// across the module.
//
// GridWalk panics if rows or cols is negative.
func GridWalk(rows, cols int) *CSR {
	if rows < 0 || cols < 0 {
		panic("linalg: grid walk: negative size")
	}
	n := rows * cols
	ptr := make([]int, n+1)
	ind := make([]int, 0, 5*n)
	val := make([]float64, 0, 5*n)
	for r := 0; r < rows; r++ {
		for c := 0; c < cols; c++ {
			s := r*cols + c
			stay := 0.0
			if r == 0 {
				stay += 0.25
			}
			if c == 0 {
				stay += 0.25
			}
			if c == cols-1 {
				stay += 0.25
			}
			if r == rows-1 {
				stay += 0.25
			}
			// Columns in increasing order: up, left, self, right, down.
			if r > 0 {
				ind = append(ind, s-cols)
				val = append(val, 0.25)
			}
			if c > 0 {
				ind = append(ind, s-1)
				val = append(val, 0.25)
			}
			if stay > 0 {
				ind = append(ind, s)
				val = append(val, stay)
			}
			if c < cols-1 {
				ind = append(ind, s+1)
				val = append(val, 0.25)
			}
			if r < rows-1 {
				ind = append(ind, s+cols)
				val = append(val, 0.25)
			}
			ptr[s+1] = len(ind)
		}
	}
	return &CSR{rows: n, cols: n, Ptr: ptr, Ind: ind, Val: val}
}

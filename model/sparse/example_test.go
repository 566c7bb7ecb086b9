package sparse_test

import (
	"fmt"

	"plumbline/model/sparse"
)

// A chain of five junctions: the matrix tridiag(−1, 2, −1), whose solution
// for b = 1 is x_i = i(n+1−i)/2.
func Example() {
	n := 5
	var rows, cols []int
	var off []float64
	for i := 0; i+1 < n; i++ {
		rows = append(rows, i)
		cols = append(cols, i+1)
		off = append(off, -1)
	}
	diag := []float64{2, 2, 2, 2, 2}

	sym, err := sparse.Analyze(n, rows, cols, sparse.Options{}) // once per topology
	if err != nil {
		fmt.Println(err)
		return
	}
	f := sym.NewFactor()
	if err := f.Factorize(diag, off); err != nil { // once per iteration
		fmt.Println(err)
		return
	}
	x := []float64{1, 1, 1, 1, 1}
	f.Solve(x, x)
	fmt.Printf("%.4f\n", x)

	// A zero pivot names the junction.
	diag[2] = -1
	fmt.Println(f.Factorize(diag, off) != nil)
	// Output:
	// [2.5000 4.0000 4.5000 4.0000 2.5000]
	// true
}

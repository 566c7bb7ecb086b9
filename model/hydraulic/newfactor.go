package hydraulic

func newFactorizer(n int, rows, cols []int, dense bool) (factorizer, error) {
	return newDenseFactor(n, rows, cols), nil
}

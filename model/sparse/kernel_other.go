//go:build !amd64

package sparse

// useVector is false where there is no vector tile kernel.
const useVector = false

func kern8x4(k int, a *float64, lda int, b *float64, ldb int, c *float64, ldc int) {
	panic("sparse: kern8x4 without vector support")
}

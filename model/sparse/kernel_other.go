//go:build !amd64

package sparse

// useVector is false where there are no vector tile kernels.
var useVector = false

func kern8x4(k int, a *float64, lda int, b *float64, ldb int, c *float64, ldc int) {
	panic("sparse: vector kernel without vector support")
}

func kern4x4(k int, a *float64, lda int, b *float64, ldb int, c *float64, ldc int) {
	panic("sparse: vector kernel without vector support")
}

func kern8x1(k int, a *float64, lda int, b *float64, ldb int, c *float64) {
	panic("sparse: vector kernel without vector support")
}

func kern4x1(k int, a *float64, lda int, b *float64, ldb int, c *float64) {
	panic("sparse: vector kernel without vector support")
}

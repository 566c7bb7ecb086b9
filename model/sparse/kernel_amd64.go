package sparse

import "golang.org/x/sys/cpu"

// useVector selects the AVX2/FMA tile kernel when the processor has it.
var useVector = cpu.X86.HasAVX2 && cpu.X86.HasFMA

// kern8x4 computes C -= A Bᵀ for an 8×4 tile of C (column-major, leading
// dimension ldc) from the 8×k block A (leading dimension lda) and the 4×k
// block B (leading dimension ldb). Implemented in kernel_amd64.s; the caller
// checks the bounds.
//
//go:noescape
func kern8x4(k int, a *float64, lda int, b *float64, ldb int, c *float64, ldc int)

// kern4x4 is kern8x4 for a 4×4 tile.
//
//go:noescape
func kern4x4(k int, a *float64, lda int, b *float64, ldb int, c *float64, ldc int)

// kern8x1 computes c[0:8] -= A b for the 8×k block A (leading dimension lda)
// and the vector b of stride ldb.
//
//go:noescape
func kern8x1(k int, a *float64, lda int, b *float64, ldb int, c *float64)

// kern4x1 is kern8x1 for 4 rows.
//
//go:noescape
func kern4x1(k int, a *float64, lda int, b *float64, ldb int, c *float64)

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

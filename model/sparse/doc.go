// Package sparse solves sparse symmetric positive definite systems A x = b
// by Cholesky factorisation, L Lᵀ = P A Pᵀ. It is written for the
// Schur-complement system of the global gradient method (Todini & Pilati
// 1988), whose matrix has the graph of the pipe network: one row per
// junction, one off-diagonal pair per pipe, pump or valve between two
// junctions.
//
// # Use
//
// The pattern is analysed once per network topology, the values are
// factorised once per Newton iteration:
//
//	sym, err := sparse.Analyze(n, rows, cols, sparse.Options{}) // once
//	f := sym.NewFactor()                                        // once
//	for iteration := ... {
//		err := f.Factorize(diag, offdiag) // diag[i] = A[i][i], offdiag[k] = A[rows[k]][cols[k]]
//		f.Solve(x, b)
//	}
//
// Entry k of offdiag is the value of the pair (rows[k], cols[k]) given to
// Analyze; the pair may be given in either triangle and may repeat (repeats
// are summed, so each pipe can contribute its own entry). The diagonal is
// always part of the pattern.
//
// # Ordering
//
// Analyze computes a fill-reducing ordering (Options.Ordering), then
// postorders the elimination tree (Liu 1990) and merges columns into
// relaxed supernodes; the ordering returned by Symbolic.Perm includes both
// steps (they do not change the fill). The orderings:
//
//   - MinimumDegree (default, zero value): approximate minimum degree on
//     the quotient graph with element absorption, aggressive absorption,
//     mass elimination and supervariables (Amestoy, Davis & Duff 1996).
//     Nodes of degree above 10√n are ordered last.
//   - ReverseCuthillMcKee: profile ordering (George & Liu 1981, ch. 4).
//   - Natural: the given order.
//
// Measured nonzeros of L (diagonal included) on the generated test graphs
// (bench_test.go; "network" is a street grid with a quarter of the segments
// missing, 5 % diagonals and n/500 long random links, average degree ≈ 3.1;
// "grid+" the full 5-point grid with the same diagonals and links; "grid"
// the plain 5-point grid):
//
//	graph          n       edges    minimum degree   RCM           natural
//	network     1 024      1 540        5 570           17 343        23 012
//	grid+       1 024      2 036       12 246           29 558        33 891
//	grid        1 024      1 984       11 895           23 344        32 799
//	network    10 000     15 604       79 906        1 158 924       758 758
//	grid+      10 000     20 298      209 212        1 742 297     1 075 757
//	grid       10 000     19 800      196 600          681 550     1 000 099
//	network    99 856    157 205    1 185 301      117 387 625             —
//	grid+      99 856    204 320    3 484 235      191 361 875             —
//	grid       99 856    199 080    2 971 294       21 185 746             —
//
// Minimum degree wins everywhere, by a factor 50 to 100 on the large networks
// (random long links destroy any band), hence the default. RCM is kept for
// comparison and as a fallback.
//
// # Numerics
//
// Factorize is a left-looking supernodal Cholesky factorisation (Ng &
// Peyton 1993). Each supernode is a dense column-major block; the updates
// between supernodes and the blocked factorisation of each block run on one
// dense kernel, C −= A Bᵀ, which uses AVX2 fused multiply-add tiles where
// the processor has them (amd64) and plain Go elsewhere. No pivoting is done
// or needed for a positive definite matrix. A pivot that is not positive
// (or is NaN or +Inf) stops the factorisation with *NotPositiveDefiniteError
// naming the original row: in the hydraulic solver that is the junction
// whose head is not determined (for instance a zone cut off from every
// fixed-head node).
//
// For very sparse factors, those of pipe networks (a town's factor has
// about three entries per column and its supernodes are a few columns
// wide), the blocks have too little in them to repay their bookkeeping:
// when the factorisation needs at most 250 multiply-adds per column
// (Σ (column count − 1)² / n), Analyze chooses the up-looking simplicial
// factorisation instead (Davis 2006, Direct Methods for Sparse Linear
// Systems, §4.2), which computes L one row at a time by a sparse
// triangular solve over the row's structure, fixed beforehand from the
// elimination tree. On the benchmark networks it is 1.5 to 4 times faster
// there (a generated town of 5,000 junctions: 0.75 → 0.1 ms); on grids of
// 10,000 nodes and more, with some thousand multiply-adds per column, the
// supernodal factorisation is 2 to 6 times faster. The threshold is our
// measurement, not from a source. Both give the same factor to rounding.
//
// Refactorize recomputes, with the simplicial method, only the rows of L
// that a change confined to some rows of the matrix reaches: those rows
// and their ancestors in the elimination tree (a row of L depends on its
// subtree only; Liu 1990, §3), by the same operations as Factorize, so
// the factor is the one Factorize would give, bit for bit. The top of the
// tree is on every path, so on a generated town of 100,000 junctions one
// changed row still costs about a fifth of a full factorisation (≈ 3 ms
// against 14 ms, 200 of 100,000 rows); a hundred rows near one another
// about a quarter.
//
// The order of operations is fixed by the pattern, so equal input gives
// bit-identical output on one machine; results may differ in the last bits
// between processors with and without fused multiply-add.
//
// # Speed
//
// Measured on the 2-core AMD EPYC development machine (thread CPU time, one
// goroutine, other jobs running; go test -bench . gives the wall times):
//
//	graph      n        Analyze   of which ordering   Factorize   Solve
//	network    99 856   ≈ 110 ms  ≈ 46 ms             ≈ 22 ms     ≈ 4 ms
//	grid+      99 856   ≈ 115 ms  ≈ 50 ms             ≈ 55 ms     ≈ 10 ms
//	grid       99 856   ≈ 80 ms   ≈ 28 ms             ≈ 37 ms     ≈ 9 ms
//
// ("grid+" is the full 5-point grid with 5 % diagonals and n/500 long random
// links, nnz(L) ≈ 3.5 million.) A dense gonum Cholesky of order 2000 takes
// 0.5 to 3.5 s (wall) on the same machine, depending on its load.
//
// # Memory ownership
//
// Analyze copies what it needs; the caller may reuse rows and cols
// afterwards. A Symbolic is immutable. A Factor owns the values of L and all
// scratch space, allocated by NewFactor; Factorize and Solve allocate
// nothing. Factorize reads diag and offdiag and keeps no reference to them.
// Solve writes dst and may be given the same slice as b.
//
// # Errors
//
// Bad shapes (negative order, index out of range, a diagonal pair in the
// off-diagonal list, slices of the wrong length) return an error wrapping
// ErrShape that names the entry. A failed factorisation returns
// *NotPositiveDefiniteError and leaves the Factor unusable for Solve until
// the next successful Factorize. Solve panics when called without a
// successful Factorize or with slices of the wrong length, as those are
// programming errors.
//
// # Concurrency
//
// A Symbolic may be shared by any number of goroutines. A Factor is not
// safe for concurrent use; several Factors made from one Symbolic are
// independent and may be used at the same time (for example one per
// scenario being simulated).
//
// For large patterns (about 10⁷ flops and more) Analyze splits the
// elimination tree into two sets of independent subtrees and the supernodes
// above them. With Options.Workers = 2 (and GOMAXPROCS ≥ 2) Factorize runs
// the second set on one extra goroutine, started and joined inside the call,
// so no goroutine outlives it; by default everything runs on the caller's
// goroutine. The split, not the number of goroutines, fixes the order of
// operations: one and two goroutines give bit-identical factors. Solve is
// sequential.
//
// # Sources
//
//   - A. George & J. W. H. Liu, Computer Solution of Large Sparse Positive
//     Definite Systems, Prentice-Hall, 1981 (graph model of elimination,
//     RCM, envelope fill).
//   - P. R. Amestoy, T. A. Davis & I. S. Duff, An approximate minimum degree
//     ordering algorithm, SIAM J. Matrix Anal. Appl. 17(4):886-905, 1996.
//   - J. W. H. Liu, The role of elimination trees in sparse factorization,
//     SIAM J. Matrix Anal. Appl. 11(1):134-172, 1990.
//   - J. R. Gilbert, E. G. Ng & B. W. Peyton, An efficient algorithm to
//     compute row and column counts for sparse Cholesky factorization, SIAM
//     J. Matrix Anal. Appl. 15(4):1075-1091, 1994 (row subtrees; this
//     package walks them directly, O(nnz(L)), which is fast enough here).
//   - J. W. H. Liu, E. G. Ng & B. W. Peyton, On finding supernodes for sparse
//     matrix computations, SIAM J. Matrix Anal. Appl. 14(1):242-252, 1993;
//     C. Ashcraft & R. Grimes, The influence of relaxed supernode partitions
//     on the multifrontal method, ACM TOMS 15(4):291-309, 1989.
//   - E. G. Ng & B. W. Peyton, Block sparse Cholesky algorithms on advanced
//     uniprocessor computers, SIAM J. Sci. Comput. 14(5):1034-1056, 1993.
//   - E. Todini & S. Pilati, A gradient algorithm for the analysis of pipe
//     networks, in Computer Applications in Water Supply, vol. 1, 1988.
//
// All code here is written from these publications; none is taken from
// another sparse library.
package sparse

// Package sparse solves sparse symmetric positive definite systems A x = b
// by Cholesky factorisation, L Lᵀ = P A Pᵀ. It is written for the
// Schur-complement system of the global gradient method (Todini & Pilati
// 1988), whose matrix has the graph of the pipe network.
package sparse

package sparse

// buildAdjacency returns the adjacency graph of the symmetric pattern in
// compressed form: the neighbours of node i are adj[ptr[i]:ptr[i+1]], in
// ascending order, each once, without i itself. The input pairs may come in
// either triangle and repeat.
func buildAdjacency(n int, rows, cols []int) (ptr, adj []int) {
	ptr = make([]int, n+1)
	for k := range rows {
		ptr[rows[k]+1]++
		ptr[cols[k]+1]++
	}
	for i := 0; i < n; i++ {
		ptr[i+1] += ptr[i]
	}
	full := make([]int, ptr[n])
	fill := make([]int, n)
	copy(fill, ptr[:n])
	// Scatter by source node; filling in the order of the other end sorted
	// would need a sort, so a second counting pass below orders them.
	for k := range rows {
		i, j := rows[k], cols[k]
		full[fill[i]] = j
		fill[i]++
		full[fill[j]] = i
		fill[j]++
	}
	// Transpose twice (a counting sort) to get ascending neighbour lists,
	// dropping duplicates on the way.
	tptr := make([]int, n+1)
	for i := 0; i < n; i++ {
		for _, j := range full[ptr[i]:ptr[i+1]] {
			tptr[j+1]++
		}
	}
	for i := 0; i < n; i++ {
		tptr[i+1] += tptr[i]
	}
	tadj := make([]int, ptr[n])
	copy(fill, tptr[:n])
	for i := 0; i < n; i++ {
		for _, j := range full[ptr[i]:ptr[i+1]] {
			tadj[fill[j]] = i
			fill[j]++
		}
	}
	// tadj[tptr[j]:tptr[j+1]] lists the i with j in adj(i), ascending in i.
	// The pattern is symmetric, so that is adj(j), sorted, with repeats.
	ptr2 := make([]int, n+1)
	out := full[:0]
	last := make([]int, n)
	for i := range last {
		last[i] = -1
	}
	for j := 0; j < n; j++ {
		for _, i := range tadj[tptr[j]:tptr[j+1]] {
			if last[i] != j {
				last[i] = j
				out = append(out, i)
			}
		}
		ptr2[j+1] = len(out)
	}
	return ptr2, out
}

// permutedAdjacency returns the adjacency graph relabelled by the ordering:
// node k of the result is original node perm[k]. Lists are not sorted.
func permutedAdjacency(n int, ptr, adj, perm, iperm []int) (pptr, padj []int) {
	pptr = make([]int, n+1)
	padj = make([]int, len(adj))
	q := 0
	for k := 0; k < n; k++ {
		o := perm[k]
		for _, j := range adj[ptr[o]:ptr[o+1]] {
			padj[q] = iperm[j]
			q++
		}
		pptr[k+1] = q
	}
	return pptr, padj
}

// invert returns the inverse permutation of p.
func invert(p []int) []int {
	ip := make([]int, len(p))
	for k, v := range p {
		ip[v] = k
	}
	return ip
}

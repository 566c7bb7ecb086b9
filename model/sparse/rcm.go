package sparse

import "slices"

// rcmOrder returns the reverse Cuthill-McKee ordering of the graph (ptr, adj):
// order[k] is the node eliminated k-th. Each connected component is numbered
// by breadth-first search from a pseudo-peripheral node, neighbours in order
// of increasing degree, and the whole sequence is reversed (George & Liu
// 1981, "Computer Solution of Large Sparse Positive Definite Systems",
// §4.3 and the pseudo-peripheral node finder of §4.3.2).
func rcmOrder(n int, ptr, adj []int) []int {
	order := make([]int, 0, n)
	visited := make([]bool, n)
	level := make([]int, n) // BFS stamp for the pseudo-peripheral search
	for i := range level {
		level[i] = -1
	}
	queue := make([]int, 0, n)
	stamp := 0
	deg := func(i int) int { return ptr[i+1] - ptr[i] }

	// bfs fills queue with the component of root in level order (ignoring
	// visited nodes) and returns the start of the last level.
	bfs := func(root int) (lastStart int, depth int) {
		stamp++
		queue = queue[:0]
		queue = append(queue, root)
		level[root] = stamp
		lo := 0
		for lo < len(queue) {
			hi := len(queue)
			lastStart = lo
			depth++
			for _, v := range queue[lo:hi] {
				for _, u := range adj[ptr[v]:ptr[v+1]] {
					if !visited[u] && level[u] != stamp {
						level[u] = stamp
						queue = append(queue, u)
					}
				}
			}
			lo = hi
		}
		return lastStart, depth
	}

	for s := 0; s < n; s++ {
		if visited[s] {
			continue
		}
		// Pseudo-peripheral node: repeat BFS from a least-degree node of the
		// last level while the eccentricity grows.
		root := s
		last, depth := bfs(root)
		for {
			best := queue[last]
			for _, v := range queue[last:] {
				if deg(v) < deg(best) {
					best = v
				}
			}
			l2, d2 := bfs(best)
			if d2 <= depth {
				break
			}
			root, last, depth = best, l2, d2
		}
		// Cuthill-McKee numbering from root.
		start := len(order)
		order = append(order, root)
		visited[root] = true
		for lo := start; lo < len(order); lo++ {
			v := order[lo]
			first := len(order)
			for _, u := range adj[ptr[v]:ptr[v+1]] {
				if !visited[u] {
					visited[u] = true
					order = append(order, u)
				}
			}
			slices.SortStableFunc(order[first:], func(a, b int) int { return deg(a) - deg(b) })
		}
	}
	slices.Reverse(order)
	return order
}

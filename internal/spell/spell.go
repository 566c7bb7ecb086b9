// Package spell suggests the word a misspelt configuration key or file
// property was probably meant to be ("did you mean ..."), for the
// validators of network files and service configurations.
package spell

// Nearest returns the word of words within a small edit distance of s
// (a likely misspelling: one edit for words under 7 letters, two for
// longer ones), or "" when none is that close or s is shorter than 3.
func Nearest(s string, words []string) string {
	limit := 1 // short words: one slip only ("note" is not "zone")
	if len(s) >= 7 {
		limit = 2
	}
	best, bestD := "", limit+1
	for _, w := range words {
		if w == s {
			continue
		}
		if d := Distance(s, w); d < bestD {
			best, bestD = w, d
		}
	}
	if bestD > limit || len(s) < 3 {
		return ""
	}
	return best
}

// Distance is the optimal-string-alignment distance between a and b:
// insertions, deletions, substitutions and swaps of neighbours
// (Damerau 1964). Strings longer than 64 bytes are simply "far" (99).
func Distance(a, b string) int {
	if len(a) > 64 || len(b) > 64 {
		return 99
	}
	// d[i][j] is the distance between a[:i] and b[:j].
	d := make([][]int, len(a)+1)
	for i := range d {
		d[i] = make([]int, len(b)+1)
		d[i][0] = i
	}
	for j := range d[0] {
		d[0][j] = j
	}
	for i := 1; i <= len(a); i++ {
		for j := 1; j <= len(b); j++ {
			c := 1
			if a[i-1] == b[j-1] {
				c = 0
			}
			d[i][j] = min(d[i-1][j-1]+c, d[i-1][j]+1, d[i][j-1]+1)
			if i > 1 && j > 1 && a[i-1] == b[j-2] && a[i-2] == b[j-1] {
				d[i][j] = min(d[i][j], d[i-2][j-2]+1) // transposition
			}
		}
	}
	return d[len(a)][len(b)]
}

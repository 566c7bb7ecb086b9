package spell

import "testing"

// Distances worked by hand from the definition (optimal string
// alignment: a swap of neighbours costs one).
func TestDistance(t *testing.T) {
	for _, c := range []struct {
		a, b string
		want int
	}{
		{"", "", 0}, {"zone", "zone", 0}, {"zone", "zones", 1}, {"diamter_mm", "diameter_mm", 1},
		{"lenght_m", "length_m", 1}, {"kitten", "sitting", 3}, {"ca", "abc", 3},
	} {
		if got := Distance(c.a, c.b); got != c.want {
			t.Errorf("Distance(%q, %q) = %d, want %d", c.a, c.b, got, c.want)
		}
	}
}

func TestNearest(t *testing.T) {
	words := []string{"zone", "elevation_m", "demand_lps", "pattern"}
	for _, c := range []struct{ s, want string }{
		{"zome", "zone"}, {"elevaton_m", "elevation_m"}, {"demnad_lps", "demand_lps"}, {"note", ""}, {"zo", ""}, {"zone", ""},
	} {
		if got := Nearest(c.s, words); got != c.want {
			t.Errorf("Nearest(%q) = %q, want %q", c.s, got, c.want)
		}
	}
}

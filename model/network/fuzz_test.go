package network

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"testing"
)

// FuzzRead checks that Parse never panics on any input, that a leading
// byte order mark changes none of its answers, and that a file it
// accepts survives a rewrite: Read(Write(n)) equals n, and writing
// that again gives the same bytes. Seeds: the corpus under
// testdata/fuzz/FuzzRead plus every network file in testdata/network.
func FuzzRead(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join(testdata, "*.geojson"))
	for _, path := range files {
		data, err := os.ReadFile(path)
		if err != nil {
			f.Fatal(err)
		}
		if len(data) > 64<<10 {
			continue // large generated towns slow mutation down
		}
		f.Add(data)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		n, probs := Parse(data, "fuzz.geojson")
		if !bytes.HasPrefix(data, []byte(utf8BOM)) {
			// A leading byte order mark changes nothing, lines included.
			_, bomProbs := Parse(append([]byte(utf8BOM), data...), "fuzz.geojson")
			if fmt.Sprint(bomProbs) != fmt.Sprint(probs) {
				t.Fatalf("with a byte order mark:\n got %v\nwant %v", bomProbs, probs)
			}
		}
		if n == nil {
			if !HasErrors(probs) {
				t.Fatalf("no network and no error")
			}
			return
		}
		var b1 bytes.Buffer
		if err := Write(&b1, n); err != nil {
			t.Fatalf("Write of an accepted network: %v", err)
		}
		m, probs2 := Parse(b1.Bytes(), "rewritten.geojson")
		if m == nil {
			t.Fatalf("rewritten file rejected: %v\n%s", probs2, b1.String())
		}
		if d := diffNetworks(n, m); d != "" {
			t.Fatalf("Read(Write(n)) differs: %s", d)
		}
		var b2 bytes.Buffer
		if err := Write(&b2, m); err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(b1.Bytes(), b2.Bytes()) {
			t.Fatalf("second rewrite differs:\n%s\n%s", b1.String(), b2.String())
		}
	})
}

package config

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzParse checks that Parse never panics, that it returns a Config
// exactly when it reports no error, and that every problem has a place.
// Seeds: testdata/fuzz/FuzzParse plus every file in testdata/config.
// Files the configuration names are read only from testdata.
func FuzzParse(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join(testdata, "*.yaml"))
	for _, p := range files {
		data, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	root, err := filepath.Abs("../../testdata")
	if err != nil {
		f.Fatal(err)
	}
	confined := func(path string) ([]byte, error) {
		abs, err := filepath.Abs(path)
		if err != nil || !strings.HasPrefix(abs, root+string(filepath.Separator)) {
			return nil, errors.New("outside testdata")
		}
		return os.ReadFile(abs)
	}
	name := filepath.Join(testdata, "fuzz.yaml")
	f.Fuzz(func(t *testing.T, data []byte) {
		c, probs := parse(data, name, confined)
		if (c == nil) != HasErrors(probs) {
			t.Fatalf("config %v with problems %v", c != nil, probs)
		}
		for _, p := range probs {
			if p.File == "" || p.Message == "" {
				t.Fatalf("problem without a place or message: %+v", p)
			}
		}
	})
}

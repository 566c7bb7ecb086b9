package config

import (
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"testing"
)

// A configuration, its sensors file and its network file may each start
// with a UTF-8 byte order mark (editors on some desktops write one): the
// YAML decoder skips it (YAML 1.2 §5.2 allows one at the start of a
// stream), the network reader too, and every problem keeps its file and
// line. Each file of testdata/config is loaded once as it is and once
// with a mark in front of it and of every file it names.
func TestByteOrderMark(t *testing.T) {
	const bom = "\xef\xbb\xbf"
	withBOM := func(path string) ([]byte, error) {
		data, err := os.ReadFile(path)
		if err != nil {
			return nil, err
		}
		return append([]byte(bom), data...), nil
	}
	files, err := filepath.Glob(filepath.Join(testdata, "*.yaml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no configurations in %s: %v", testdata, err)
	}
	good := 0
	for _, path := range files {
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		want, wantProbs := parseKeep(data, path, os.ReadFile)
		got, gotProbs := parseKeep(append([]byte(bom), data...), path, withBOM)
		if fmt.Sprint(gotProbs) != fmt.Sprint(wantProbs) {
			t.Errorf("%s with byte order marks:\n got %v\nwant %v", filepath.Base(path), gotProbs, wantProbs)
			continue
		}
		if !reflect.DeepEqual(got, want) {
			t.Errorf("%s with byte order marks: the configuration differs", filepath.Base(path))
		}
		if want != nil && !HasErrors(wantProbs) && want.Network != nil && len(want.Sensors) > 0 {
			good++
		}
	}
	if good < 2 {
		t.Errorf("only %d good configurations with a network and sensors: the test would prove little", good)
	}
}

package readfile

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumbline/model/telemetry"
)

// A stray quote costs its own line only: the lines after it are read, and
// the bad one is named with its line number.
func TestStrayQuoteCostsOneLine(t *testing.T) {
	var b strings.Builder
	b.WriteString("time,sensor,value,unit\n")
	t0 := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	for i := 0; i < 100; i++ {
		if i == 40 {
			b.WriteString("\"2026-03-02T03:20:00Z,P-1,3.1,m\n")
			continue
		}
		b.WriteString(t0.Add(time.Duration(i)*5*time.Minute).Format(time.RFC3339) + ",P-1,3.1,m\n")
	}
	path := filepath.Join(t.TempDir(), "r.csv")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	err = f.Read(context.Background(), time.Time{}, t0.Add(24*time.Hour), nil, func(telemetry.Reading) error { n++; return nil })
	if n != 99 {
		t.Errorf("read %d readings, want the 99 good ones", n)
	}
	var fe *FileError
	if !errors.As(err, &fe) || len(fe.Lines) != 1 || fe.Lines[0].Line != 42 {
		t.Errorf("error %v, want one bad line, line 42", err)
	}
}

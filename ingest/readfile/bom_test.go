package readfile

import (
	"errors"
	"fmt"
	"strings"
	"testing"
)

// bom is the UTF-8 byte order mark (U+FEFF), which spreadsheet and
// desktop tools often write at the start of a text file.
const bom = "\xef\xbb\xbf"

// A leading byte order mark is skipped in either format and under the
// sniffer: the file reads as it does without one, with the same stats
// and the same bad lines at the same line numbers.
func TestByteOrderMark(t *testing.T) {
	lp := "reading,sensor=A,unit=m value=1 1772413800000000000\n" +
		"reading,sensor=A,unit=m value=x 1772413860000000000\n" +
		"reading,sensor=A,unit=m value=2 1772413920000000000\n"
	for _, c := range []struct {
		name, file, body string
		readings         int
		badLine          int // 0: none
	}{
		{"csv header", "r.csv", "time,sensor,value,unit\n2026-03-02T01:10:00Z,A,1,m\n2026-03-02T01:11:00Z,A,x,m\n", 1, 3},
		{"csv comment first", "r.csv", "# exported\ntime,sensor,value,unit\n2026-03-02T01:10:00Z,A,1,m\n", 1, 0},
		{"csv quoted header", "r.csv", "\"time\",\"sensor\",\"value\",\"unit\"\n2026-03-02T01:10:00Z,A,1,m\n", 1, 0},
		{"csv sniffed after a comment", "r.txt", "# exported, by hand\ntime,sensor,value,unit\n2026-03-02T01:10:00Z,A,1,m\n", 1, 0},
		{"line protocol", "r.lp", lp, 2, 2},
		{"line protocol sniffed", "r.txt", lp, 2, 2},
		{"line protocol comment first", "r.lp", "# exported\n" + lp, 2, 3},
	} {
		t.Run(c.name, func(t *testing.T) {
			plain, plainStats, plainErr := read(t, write(t, c.file, c.body), Options{}, all[0], all[1], nil)
			got, st, err := read(t, write(t, c.file, bom+c.body), Options{}, all[0], all[1], nil)
			if len(plain) != c.readings {
				t.Fatalf("without a byte order mark: %d readings, want %d (%v)", len(plain), c.readings, plainErr)
			}
			if fmt.Sprint(got) != fmt.Sprint(plain) || st != plainStats {
				t.Fatalf("with a byte order mark: %+v, Stats %+v, %v\nwant %+v, Stats %+v, %v", got, st, err, plain, plainStats, plainErr)
			}
			var fe *FileError
			switch {
			case c.badLine == 0 && err != nil:
				t.Fatalf("error %v, want none", err)
			case c.badLine != 0 && (!errors.As(err, &fe) || len(fe.Lines) != 1 || fe.Lines[0].Line != c.badLine ||
				!strings.Contains(err.Error(), fmt.Sprintf("%s:%d: ", c.file, c.badLine))):
				t.Fatalf("error %v, want one bad line, line %d", err, c.badLine)
			}
		})
	}
}

package spool

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"sync"
	"testing"
	"time"
)

func rec(i int) []byte { return []byte(fmt.Sprintf("reading,sensor=S%d value=%d %d", i%7, i, i)) }

func open(t *testing.T, dir string, opt Options) (*Spool, OpenStats) {
	t.Helper()
	s, st, err := Open(dir, opt)
	if err != nil {
		t.Fatalf("Open: %v", err)
	}
	t.Cleanup(func() { s.Close() })
	return s, st
}

func appendN(t *testing.T, s *Spool, from, to, batch int) {
	t.Helper()
	for i := from; i < to; i += batch {
		var rs [][]byte
		for j := i; j < to && j < i+batch; j++ {
			rs = append(rs, rec(j))
		}
		if err := s.Append(rs...); err != nil {
			t.Fatalf("Append %d: %v", i, err)
		}
	}
}

// drain reads everything waiting, committing after each batch, and
// returns the payloads.
func drain(t *testing.T, s *Spool, max int) []string {
	t.Helper()
	var out []string
	for {
		b, err := s.Next(max, 1<<20)
		if err != nil {
			t.Fatalf("Next: %v", err)
		}
		if len(b.Records) == 0 {
			return out
		}
		for _, r := range b.Records {
			out = append(out, string(r))
		}
		if err := s.Commit(b.Next); err != nil {
			t.Fatalf("Commit: %v", err)
		}
	}
}

func wantRange(t *testing.T, got []string, from, to int) {
	t.Helper()
	if len(got) != to-from {
		t.Fatalf("got %d records, want %d (records %d..%d)", len(got), to-from, from, to-1)
	}
	for i, g := range got {
		if w := string(rec(from + i)); g != w {
			t.Fatalf("record %d: got %q, want %q", i, g, w)
		}
	}
}

func TestAppendReadCommitAcrossSegments(t *testing.T) {
	dir := t.TempDir()
	s, _ := open(t, dir, Options{SegmentBytes: 2000})
	appendN(t, s, 0, 1000, 13)
	if got := s.Pending(); got != 1000 {
		t.Fatalf("Pending = %d, want 1000", got)
	}
	segs, _ := filepath.Glob(filepath.Join(dir, "*.seg"))
	if len(segs) < 10 {
		t.Fatalf("%d segments, want many with SegmentBytes 2000", len(segs))
	}
	got := drain(t, s, 77)
	wantRange(t, got, 0, 1000)
	if got := s.Pending(); got != 0 {
		t.Fatalf("Pending after drain = %d, want 0", got)
	}
	// Consumed segments are gone; only the active one stays.
	segs, _ = filepath.Glob(filepath.Join(dir, "*.seg"))
	if len(segs) != 1 {
		t.Fatalf("%d segments after commit, want 1", len(segs))
	}
	if s.Bytes() > 2000+200 {
		t.Fatalf("Bytes = %d after drain, want at most one segment", s.Bytes())
	}
}

func TestReopenResumesAtCommitted(t *testing.T) {
	dir := t.TempDir()
	s, _, err := Open(dir, Options{SegmentBytes: 4096})
	if err != nil {
		t.Fatal(err)
	}
	appendN(t, s, 0, 500, 50)
	b, err := s.Next(120, 1<<20)
	if err != nil || len(b.Records) != 120 {
		t.Fatalf("Next: %d records, %v", len(b.Records), err)
	}
	if err := s.Commit(b.Next); err != nil {
		t.Fatal(err)
	}
	// Read further without committing: those records come again.
	if _, err := s.Next(100, 1<<20); err != nil {
		t.Fatal(err)
	}
	s.Close()

	s2, st := open(t, dir, Options{SegmentBytes: 4096})
	if st.Pending != 380 || st.TruncatedBytes != 0 || st.CorruptBytes != 0 {
		t.Fatalf("OpenStats = %+v, want Pending 380 and no damage", st)
	}
	appendN(t, s2, 500, 600, 7)
	wantRange(t, drain(t, s2, 33), 120, 600)
}

func TestRewind(t *testing.T) {
	s, _ := open(t, t.TempDir(), Options{})
	appendN(t, s, 0, 10, 10)
	b, _ := s.Next(4, 1<<20)
	if err := s.Commit(b.Next); err != nil {
		t.Fatal(err)
	}
	_, _ = s.Next(3, 1<<20)
	if err := s.Rewind(); err != nil {
		t.Fatal(err)
	}
	wantRange(t, drain(t, s, 100), 4, 10)
}

// A crash in the middle of a write leaves a partial record at the end of
// the last segment; Open cuts it off and keeps every whole record.
func TestTornTail(t *testing.T) {
	for _, cut := range []int64{1, 4, 8, 9, 20} {
		t.Run(fmt.Sprint(cut), func(t *testing.T) {
			dir := t.TempDir()
			s, _, err := Open(dir, Options{})
			if err != nil {
				t.Fatal(err)
			}
			appendN(t, s, 0, 100, 10)
			s.Close()
			segs, _ := filepath.Glob(filepath.Join(dir, "*.seg"))
			last := segs[len(segs)-1]
			fi, _ := os.Stat(last)
			// The last record is 8 header bytes + len(rec(99)); cutting
			// less than that damages it and only it.
			if err := os.Truncate(last, fi.Size()-cut); err != nil {
				t.Fatal(err)
			}
			s2, st := open(t, dir, Options{})
			wantCut := int64(headerBytes+len(rec(99))) - cut
			if st.TruncatedBytes != wantCut || st.Pending != 99 {
				t.Fatalf("OpenStats = %+v, want TruncatedBytes %d and Pending 99", st, wantCut)
			}
			// New records follow on directly.
			if err := s2.Append(rec(99)); err != nil {
				t.Fatal(err)
			}
			wantRange(t, drain(t, s2, 1000), 0, 100)
		})
	}
}

// A flipped byte inside an older segment fails that record's CRC-32C;
// the rest of that segment is dropped and counted, every other segment
// is delivered in order.
func TestCRCCorruption(t *testing.T) {
	dir := t.TempDir()
	s, _, err := Open(dir, Options{SegmentBytes: 1000})
	if err != nil {
		t.Fatal(err)
	}
	appendN(t, s, 0, 200, 1)
	s.Close()
	segs, _ := filepath.Glob(filepath.Join(dir, "*.seg"))
	sort.Strings(segs)
	if len(segs) < 4 {
		t.Fatalf("%d segments, want at least 4", len(segs))
	}
	// Damage the third record of the second segment.
	victim := segs[1]
	b, _ := os.ReadFile(victim)
	var base int
	fmt.Sscanf(filepath.Base(victim), "%d.seg", &base)
	off := 0
	for k := 0; k < 2; k++ {
		off += headerBytes + len(rec(base+k))
	}
	b[off+headerBytes+3] ^= 0x40
	if err := os.WriteFile(victim, b, 0o644); err != nil {
		t.Fatal(err)
	}
	var base2 int
	fmt.Sscanf(filepath.Base(segs[2]), "%d.seg", &base2)

	s2, st := open(t, dir, Options{SegmentBytes: 1000})
	if want := int64(len(b) - off); st.CorruptBytes != want {
		t.Fatalf("CorruptBytes = %d, want %d", st.CorruptBytes, want)
	}
	got := drain(t, s2, 1000)
	var want []string
	for i := 0; i < 200; i++ {
		if i >= base+2 && i < base2 {
			continue // the dropped rest of the damaged segment
		}
		want = append(want, string(rec(i)))
	}
	if len(got) != len(want) {
		t.Fatalf("got %d records, want %d", len(got), len(want))
	}
	for i := range got {
		if got[i] != want[i] {
			t.Fatalf("record %d: got %q, want %q", i, got[i], want[i])
		}
	}
}

func TestDamagedCommittedFile(t *testing.T) {
	dir := t.TempDir()
	s, _, err := Open(dir, Options{})
	if err != nil {
		t.Fatal(err)
	}
	appendN(t, s, 0, 50, 50)
	b, _ := s.Next(20, 1<<20)
	if err := s.Commit(b.Next); err != nil {
		t.Fatal(err)
	}
	s.Close()
	if err := os.WriteFile(filepath.Join(dir, committedName), []byte("garbage"), 0o644); err != nil {
		t.Fatal(err)
	}
	s2, st := open(t, dir, Options{})
	if !st.CommittedReset || st.Pending != 50 {
		t.Fatalf("OpenStats = %+v, want CommittedReset and all 50 pending again", st)
	}
	wantRange(t, drain(t, s2, 100), 0, 50)
}

func TestFull(t *testing.T) {
	s, _ := open(t, t.TempDir(), Options{MaxBytes: 1000, SegmentBytes: 400})
	n := 0
	var err error
	for ; n < 1000; n++ {
		if err = s.Append(rec(n)); err != nil {
			break
		}
	}
	if !errors.Is(err, ErrFull) {
		t.Fatalf("Append error = %v, want ErrFull", err)
	}
	if s.Bytes() > 1000 {
		t.Fatalf("Bytes = %d, want at most MaxBytes 1000", s.Bytes())
	}
	// Draining frees space again.
	wantRange(t, drain(t, s, 1000), 0, n)
	if err := s.Append(rec(n)); err != nil {
		t.Fatalf("Append after drain: %v", err)
	}
	if err := s.Append(make([]byte, MaxRecordBytes+1)); !errors.Is(err, ErrTooLarge) {
		t.Fatalf("Append of a huge record: %v, want ErrTooLarge", err)
	}
}

// One appender and one reader at the same time (run with -race): every
// record arrives once and in order.
func TestConcurrentAppendAndRead(t *testing.T) {
	s, _ := open(t, t.TempDir(), Options{SegmentBytes: 8192, NoSync: true})
	const total = 20000
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		for i := 0; i < total; i += 100 {
			var rs [][]byte
			for j := i; j < i+100; j++ {
				rs = append(rs, rec(j))
			}
			if err := s.Append(rs...); err != nil {
				t.Errorf("Append: %v", err)
				return
			}
		}
	}()
	var got []string
	for len(got) < total {
		if err := s.Wait(ctx); err != nil {
			t.Fatalf("Wait after %d records: %v", len(got), err)
		}
		b, err := s.Next(333, 1<<20)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range b.Records {
			got = append(got, string(r))
		}
		if err := s.Commit(b.Next); err != nil {
			t.Fatal(err)
		}
	}
	wg.Wait()
	wantRange(t, got, 0, total)
}

func TestClosed(t *testing.T) {
	s, _, err := Open(t.TempDir(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	if err := s.Append(rec(1)); !errors.Is(err, ErrClosed) {
		t.Fatalf("Append after Close: %v", err)
	}
	if err := s.Wait(context.Background()); !errors.Is(err, ErrClosed) {
		t.Fatalf("Wait after Close: %v", err)
	}
	if err := s.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
}

// BenchmarkAppend measures durable appends of ~60-byte line protocol
// records in batches (one fsync per batch) and without fsync.
func BenchmarkAppend(b *testing.B) {
	for _, c := range []struct {
		batch  int
		noSync bool
	}{{100, false}, {1000, false}, {1000, true}} {
		b.Run(fmt.Sprintf("batch=%d/nosync=%v", c.batch, c.noSync), func(b *testing.B) {
			s, _, err := Open(b.TempDir(), Options{NoSync: c.noSync, MaxBytes: 1 << 40})
			if err != nil {
				b.Fatal(err)
			}
			defer s.Close()
			rs := make([][]byte, c.batch)
			for i := range rs {
				rs[i] = rec(i)
			}
			b.SetBytes(int64(len(rs[0]) * c.batch))
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if err := s.Append(rs...); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.N*c.batch)/b.Elapsed().Seconds(), "records/s")
		})
	}
}

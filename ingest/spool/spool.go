package spool

import (
	"bufio"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
)

// Errors returned by the spool.
var (
	// ErrFull means an Append would pass Options.MaxBytes; nothing was written.
	ErrFull = errors.New("spool: full")
	// ErrClosed means the spool was closed.
	ErrClosed = errors.New("spool: closed")
	// ErrTooLarge means a single record is larger than MaxRecordBytes.
	ErrTooLarge = errors.New("spool: record too large")
)

// MaxRecordBytes is the largest payload of one record (16 MiB).
const MaxRecordBytes = 16 << 20

const (
	headerBytes   = 8
	segmentSuffix = ".seg"
	committedName = "committed"
)

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// Options tune a spool. Zero values mean the documented defaults.
type Options struct {
	// SegmentBytes is the size at which a new segment is started
	// (default 64 MiB).
	SegmentBytes int64
	// MaxBytes caps the bytes of all segments (default 1 GiB).
	MaxBytes int64
	// NoSync skips the fsync after each Append (benchmarks and tests of
	// the layers above; never in the service).
	NoSync bool
	// ReadBuffer is the chunk the reader reads at a time (default 1 MiB).
	ReadBuffer int
}

func (o *Options) defaults() {
	if o.SegmentBytes <= 0 {
		o.SegmentBytes = 64 << 20
	}
	if o.MaxBytes <= 0 {
		o.MaxBytes = 1 << 30
	}
	if o.ReadBuffer <= 0 {
		o.ReadBuffer = 1 << 20
	}
}

// OpenStats says what Open found on disk.
type OpenStats struct {
	// Segments is the number of segment files kept.
	Segments int
	// Pending is the number of records not yet committed.
	Pending int64
	// TruncatedBytes were cut from the end of the last segment (a torn
	// write from a crash).
	TruncatedBytes int64
	// CorruptBytes were dropped from older segments because a record in
	// them failed its length or CRC check.
	CorruptBytes int64
	// CommittedReset is true when the committed file was unreadable and
	// the spool starts again at its oldest record (records may then be
	// delivered twice, which the store absorbs: same series and time
	// overwrite).
	CommittedReset bool
}

type segment struct {
	base uint64 // sequence number of the first record
	end  uint64 // sequence number after the last valid record
	size int64  // bytes of valid records
	path string
	rf   *os.File // read handle, opened by the reader
}

// Spool is a durable queue of byte records. See the package doc.
type Spool struct {
	dir string
	opt Options

	appendMu sync.Mutex // serialises Append (held across write and fsync)
	active   *os.File   // append handle of the last segment; under appendMu

	mu         sync.Mutex // guards the fields below
	segs       []*segment
	nextSeq    uint64
	committed  uint64
	totalBytes int64
	corrupt    int64
	closed     bool
	ready      chan struct{} // signalled (cap 1) after each Append

	// Reader state, used by the reader goroutine only.
	readSeg *segment
	readOff int64
	readSeq uint64
	rbuf    []byte
}

// Open opens or creates the spool in dir, recovering from a crash as the
// package doc describes.
func Open(dir string, opt Options) (*Spool, OpenStats, error) {
	opt.defaults()
	var st OpenStats
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, st, fmt.Errorf("spool %s: %w", dir, err)
	}
	s := &Spool{dir: dir, opt: opt, ready: make(chan struct{}, 1)}
	committed, ok, err := readCommitted(filepath.Join(dir, committedName))
	if err != nil {
		return nil, st, fmt.Errorf("spool %s: %w", dir, err)
	}
	names, err := filepath.Glob(filepath.Join(dir, "*"+segmentSuffix))
	if err != nil {
		return nil, st, fmt.Errorf("spool %s: %w", dir, err)
	}
	for _, name := range names {
		base, err := strconv.ParseUint(strings.TrimSuffix(filepath.Base(name), segmentSuffix), 10, 64)
		if err != nil {
			return nil, st, fmt.Errorf("spool %s: segment name %s is not a sequence number", dir, filepath.Base(name))
		}
		s.segs = append(s.segs, &segment{base: base, path: name})
	}
	slices.SortFunc(s.segs, func(a, b *segment) int {
		switch {
		case a.base < b.base:
			return -1
		case a.base > b.base:
			return 1
		}
		return 0
	})
	if !ok && len(s.segs) > 0 {
		// No committed file yet, or a damaged one: start at the oldest record.
		st.CommittedReset = fileExists(filepath.Join(dir, committedName))
		committed = s.segs[0].base
	}
	for i, seg := range s.segs {
		valid, count, err := scanSegment(seg.path)
		if err != nil {
			return nil, st, fmt.Errorf("spool %s: %w", dir, err)
		}
		fi, err := os.Stat(seg.path)
		if err != nil {
			return nil, st, fmt.Errorf("spool %s: %w", dir, err)
		}
		if cut := fi.Size() - valid; cut > 0 {
			if err := os.Truncate(seg.path, valid); err != nil {
				return nil, st, fmt.Errorf("spool %s: truncate %s: %w", dir, filepath.Base(seg.path), err)
			}
			if i == len(s.segs)-1 {
				st.TruncatedBytes += cut
			} else {
				st.CorruptBytes += cut
			}
		}
		seg.size = valid
		seg.end = seg.base + count
		if i+1 < len(s.segs) && seg.end > s.segs[i+1].base {
			return nil, st, fmt.Errorf("spool %s: segment %s overlaps the next one", dir, filepath.Base(seg.path))
		}
	}
	// Drop segments whose records are all committed, except the last
	// (it stays the active segment).
	for len(s.segs) > 1 && s.segs[0].end <= committed {
		if err := os.Remove(s.segs[0].path); err != nil {
			return nil, st, fmt.Errorf("spool %s: %w", dir, err)
		}
		s.segs = s.segs[1:]
	}
	s.nextSeq = committed
	if n := len(s.segs); n > 0 && s.segs[n-1].end > s.nextSeq {
		s.nextSeq = s.segs[n-1].end
	}
	if committed > s.nextSeq {
		committed = s.nextSeq
	}
	s.committed = committed
	for _, seg := range s.segs {
		s.totalBytes += seg.size
	}
	s.corrupt = st.CorruptBytes
	if err := s.rewindLocked(); err != nil {
		return nil, st, fmt.Errorf("spool %s: %w", dir, err)
	}
	if n := len(s.segs); n > 0 {
		last := s.segs[n-1]
		f, err := os.OpenFile(last.path, os.O_WRONLY|os.O_APPEND, 0o644)
		if err != nil {
			return nil, st, fmt.Errorf("spool %s: %w", dir, err)
		}
		s.active = f
	}
	st.Segments = len(s.segs)
	st.Pending = s.pendingLocked()
	return s, st, nil
}

func fileExists(p string) bool { _, err := os.Stat(p); return err == nil }

// scanSegment returns the length of the valid prefix of a segment and the
// number of records in it.
func scanSegment(path string) (valid int64, count uint64, err error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, 0, err
	}
	defer f.Close()
	r := bufio.NewReaderSize(f, 1<<20)
	var hdr [headerBytes]byte
	var payload []byte
	for {
		if _, err := io.ReadFull(r, hdr[:]); err != nil {
			return valid, count, nil // clean end or torn header
		}
		n := binary.LittleEndian.Uint32(hdr[0:4])
		want := binary.LittleEndian.Uint32(hdr[4:8])
		if n > MaxRecordBytes {
			return valid, count, nil
		}
		if cap(payload) < int(n) {
			payload = make([]byte, n)
		}
		payload = payload[:n]
		if _, err := io.ReadFull(r, payload); err != nil {
			return valid, count, nil // torn payload
		}
		if recordCRC(hdr[0:4], payload) != want {
			return valid, count, nil
		}
		valid += headerBytes + int64(n)
		count++
	}
}

func recordCRC(length, payload []byte) uint32 {
	c := crc32.Update(0, castagnoli, length)
	return crc32.Update(c, castagnoli, payload)
}

func readCommitted(path string) (uint64, bool, error) {
	b, err := os.ReadFile(path)
	if errors.Is(err, os.ErrNotExist) {
		return 0, false, nil
	}
	if err != nil {
		return 0, false, err
	}
	if len(b) != 12 || crc32.Checksum(b[:8], castagnoli) != binary.LittleEndian.Uint32(b[8:]) {
		return 0, false, nil
	}
	return binary.LittleEndian.Uint64(b[:8]), true, nil
}

// Dir returns the spool's folder.
func (s *Spool) Dir() string { return s.dir }

// Append writes records as one batch, durable when it returns (unless
// NoSync). It fails with ErrFull when the batch would pass MaxBytes and
// with ErrTooLarge for a record over MaxRecordBytes; then nothing is
// written. Empty records are allowed.
func (s *Spool) Append(records ...[]byte) error {
	if len(records) == 0 {
		return nil
	}
	var size int64
	for _, r := range records {
		if len(r) > MaxRecordBytes {
			return fmt.Errorf("%w: %d bytes", ErrTooLarge, len(r))
		}
		size += headerBytes + int64(len(r))
	}
	s.appendMu.Lock()
	defer s.appendMu.Unlock()

	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return ErrClosed
	}
	if s.totalBytes+size > s.opt.MaxBytes {
		s.mu.Unlock()
		return fmt.Errorf("%w: %d of %d bytes used", ErrFull, s.totalBytes, s.opt.MaxBytes)
	}
	var last *segment
	if n := len(s.segs); n > 0 {
		last = s.segs[n-1]
	}
	first := s.nextSeq
	s.mu.Unlock()

	if last == nil || last.end != first || (last.size > 0 && last.size+size > s.opt.SegmentBytes) {
		seg, f, err := s.newSegment(first)
		if err != nil {
			return err
		}
		if s.active != nil {
			s.active.Close()
		}
		s.active = f
		s.mu.Lock()
		s.segs = append(s.segs, seg)
		s.mu.Unlock()
		last = seg
	}

	buf := make([]byte, 0, size)
	for _, r := range records {
		var hdr [headerBytes]byte
		binary.LittleEndian.PutUint32(hdr[0:4], uint32(len(r)))
		binary.LittleEndian.PutUint32(hdr[4:8], recordCRC(hdr[0:4], r))
		buf = append(buf, hdr[:]...)
		buf = append(buf, r...)
	}
	if _, err := s.active.Write(buf); err != nil {
		// Cut off whatever part of the batch reached the file.
		_ = s.active.Truncate(last.size)
		return fmt.Errorf("spool %s: write: %w", s.dir, err)
	}
	if !s.opt.NoSync {
		if err := s.active.Sync(); err != nil {
			_ = s.active.Truncate(last.size)
			return fmt.Errorf("spool %s: fsync: %w", s.dir, err)
		}
	}
	s.mu.Lock()
	last.size += size
	last.end += uint64(len(records))
	s.nextSeq = last.end
	s.totalBytes += size
	s.mu.Unlock()
	select {
	case s.ready <- struct{}{}:
	default:
	}
	return nil
}

func (s *Spool) newSegment(base uint64) (*segment, *os.File, error) {
	path := filepath.Join(s.dir, fmt.Sprintf("%020d%s", base, segmentSuffix))
	f, err := os.OpenFile(path, os.O_CREATE|os.O_WRONLY|os.O_APPEND|os.O_TRUNC, 0o644)
	if err != nil {
		return nil, nil, fmt.Errorf("spool %s: new segment: %w", s.dir, err)
	}
	if err := syncDir(s.dir); err != nil {
		f.Close()
		return nil, nil, fmt.Errorf("spool %s: %w", s.dir, err)
	}
	return &segment{base: base, end: base, path: path}, f, nil
}

func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	return d.Sync()
}

// Batch is a run of records in spool order.
type Batch struct {
	// Records are the payloads, owned by the caller.
	Records [][]byte
	// Next is the sequence number after the last record: Commit(Next)
	// marks the whole batch as taken.
	Next uint64
}

// Next returns up to max records (and at most about maxBytes of payload,
// but always at least one record when any is waiting) after the read
// cursor, and moves the cursor past them. It does not wait: an empty
// batch means nothing is waiting. Records are not removed until Commit.
func (s *Spool) Next(max int, maxBytes int) (Batch, error) {
	var b Batch
	var bytes int
	for len(b.Records) < max && (bytes < maxBytes || len(b.Records) == 0) {
		s.mu.Lock()
		if s.closed {
			s.mu.Unlock()
			return b, ErrClosed
		}
		seg := s.readSeg
		if seg == nil || s.readSeq >= seg.end {
			// Move to the next segment holding records past the cursor.
			// seg (if any) has nothing past the cursor, so any segment
			// that has is a later one.
			var nxt *segment
			for _, g := range s.segs {
				if g.end > s.readSeq {
					nxt = g
					break
				}
			}
			if nxt == nil {
				b.Next = s.readSeq
				s.mu.Unlock()
				return b, nil
			}
			s.readSeg, s.readOff = nxt, 0
			if s.readSeq < nxt.base {
				s.readSeq = nxt.base
			}
			s.mu.Unlock()
			continue
		}
		limit := seg.size
		s.mu.Unlock()

		if seg.rf == nil {
			f, err := os.Open(seg.path)
			if err != nil {
				return b, fmt.Errorf("spool %s: %w", s.dir, err)
			}
			seg.rf = f
		}
		n, err := s.readChunk(seg, limit, &b, max, maxBytes-bytes)
		if err != nil {
			return b, err
		}
		bytes += n
	}
	b.Next = s.readSeq
	return b, nil
}

// readChunk reads records from the current segment into b, up to one
// read buffer, max records and about room payload bytes.
func (s *Spool) readChunk(seg *segment, limit int64, b *Batch, max, room int) (int, error) {
	want := int64(s.opt.ReadBuffer)
	if left := limit - s.readOff; left < want {
		want = left
	}
	if cap(s.rbuf) < int(want) {
		s.rbuf = make([]byte, want)
	}
	buf := s.rbuf[:want]
	if _, err := seg.rf.ReadAt(buf, s.readOff); err != nil {
		return 0, fmt.Errorf("spool %s: read %s: %w", s.dir, filepath.Base(seg.path), err)
	}
	got := 0
	i := 0
	for len(b.Records) < max && (got < room || len(b.Records) == 0) {
		if len(buf)-i < headerBytes {
			break
		}
		n := int(binary.LittleEndian.Uint32(buf[i : i+4]))
		crc := binary.LittleEndian.Uint32(buf[i+4 : i+8])
		if n > MaxRecordBytes || s.readOff+int64(headerBytes+n) > limit {
			return got, s.skipCorrupt(seg, limit)
		}
		var payload []byte
		if i+headerBytes+n <= len(buf) {
			payload = slices.Clone(buf[i+headerBytes : i+headerBytes+n])
		} else if i == 0 {
			// A record larger than the read buffer: read it alone.
			payload = make([]byte, n)
			if _, err := seg.rf.ReadAt(payload, s.readOff+headerBytes); err != nil {
				return got, fmt.Errorf("spool %s: read %s: %w", s.dir, filepath.Base(seg.path), err)
			}
		} else {
			break
		}
		if recordCRC(buf[i:i+4], payload) != crc {
			return got, s.skipCorrupt(seg, limit)
		}
		if payload == nil {
			payload = []byte{}
		}
		b.Records = append(b.Records, payload)
		got += n
		i += headerBytes + n
		s.readOff += int64(headerBytes + n)
		s.readSeq++
	}
	return got, nil
}

// skipCorrupt gives up on the rest of a segment whose record went bad
// after Open checked it (a disk fault), counts the loss and moves on.
func (s *Spool) skipCorrupt(seg *segment, limit int64) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.corrupt += limit - s.readOff
	s.readSeq = seg.end
	s.readOff = limit
	return nil
}

// Wait blocks until records may be waiting past the read cursor, the
// context ends or the spool is closed.
func (s *Spool) Wait(ctx context.Context) error {
	for {
		s.mu.Lock()
		closed, waiting := s.closed, s.readSeq < s.nextSeq
		s.mu.Unlock()
		if closed {
			return ErrClosed
		}
		if waiting {
			return nil
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-s.ready:
		}
	}
}

// Commit records that every record before sequence number next has been
// taken by the store, durably, and deletes segments that hold nothing
// else. Committing backwards does nothing.
func (s *Spool) Commit(next uint64) error {
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return ErrClosed
	}
	if next <= s.committed {
		s.mu.Unlock()
		return nil
	}
	if next > s.nextSeq {
		s.mu.Unlock()
		return fmt.Errorf("spool %s: commit %d past the end %d", s.dir, next, s.nextSeq)
	}
	s.mu.Unlock()

	var b [12]byte
	binary.LittleEndian.PutUint64(b[:8], next)
	binary.LittleEndian.PutUint32(b[8:], crc32.Checksum(b[:8], castagnoli))
	tmp := filepath.Join(s.dir, committedName+".tmp")
	if err := writeFileSync(tmp, b[:], !s.opt.NoSync); err != nil {
		return fmt.Errorf("spool %s: commit: %w", s.dir, err)
	}
	if err := os.Rename(tmp, filepath.Join(s.dir, committedName)); err != nil {
		return fmt.Errorf("spool %s: commit: %w", s.dir, err)
	}
	if !s.opt.NoSync {
		if err := syncDir(s.dir); err != nil {
			return fmt.Errorf("spool %s: commit: %w", s.dir, err)
		}
	}

	s.mu.Lock()
	defer s.mu.Unlock()
	s.committed = next
	for len(s.segs) > 1 && s.segs[0].end <= next {
		seg := s.segs[0]
		if seg.rf != nil {
			seg.rf.Close()
		}
		if err := os.Remove(seg.path); err != nil {
			return fmt.Errorf("spool %s: %w", s.dir, err)
		}
		if s.readSeg == seg {
			s.readSeg = nil
		}
		s.totalBytes -= seg.size
		s.segs = s.segs[1:]
	}
	return nil
}

func writeFileSync(path string, b []byte, sync bool) error {
	f, err := os.OpenFile(path, os.O_CREATE|os.O_WRONLY|os.O_TRUNC, 0o644)
	if err != nil {
		return err
	}
	if _, err := f.Write(b); err != nil {
		f.Close()
		return err
	}
	if sync {
		if err := f.Sync(); err != nil {
			f.Close()
			return err
		}
	}
	return f.Close()
}

// Rewind moves the read cursor back to the first uncommitted record, so
// records read but never committed are read again (after the reader gave
// up on a batch).
func (s *Spool) Rewind() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.rewindLocked()
}

func (s *Spool) rewindLocked() error {
	s.readSeg, s.readOff, s.readSeq = nil, 0, s.committed
	for _, seg := range s.segs {
		if seg.end <= s.committed {
			continue
		}
		s.readSeg = seg
		if s.committed <= seg.base {
			s.readSeq = seg.base
			return nil
		}
		// Skip the committed records at the start of this segment.
		off, err := offsetOf(seg.path, s.committed-seg.base)
		if err != nil {
			return err
		}
		s.readOff = off
		return nil
	}
	// Everything is committed: read from the end of the last segment.
	if n := len(s.segs); n > 0 {
		s.readSeg = s.segs[n-1]
		s.readOff = s.readSeg.size
		s.readSeq = s.readSeg.end
		if s.readSeq < s.committed {
			s.readSeq = s.committed
		}
	}
	return nil
}

// offsetOf returns the byte offset of record index k of a segment.
func offsetOf(path string, k uint64) (int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	r := bufio.NewReaderSize(f, 1<<20)
	var off int64
	var hdr [headerBytes]byte
	for i := uint64(0); i < k; i++ {
		if _, err := io.ReadFull(r, hdr[:]); err != nil {
			return 0, fmt.Errorf("segment %s: record %d: %w", filepath.Base(path), i, err)
		}
		n := int64(binary.LittleEndian.Uint32(hdr[0:4]))
		if _, err := r.Discard(int(n)); err != nil {
			return 0, fmt.Errorf("segment %s: record %d: %w", filepath.Base(path), i, err)
		}
		off += headerBytes + n
	}
	return off, nil
}

// Pending returns the number of records appended and not yet committed
// (the spool depth).
func (s *Spool) Pending() int64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.pendingLocked()
}

func (s *Spool) pendingLocked() int64 {
	var n int64
	for _, seg := range s.segs {
		from := seg.base
		if s.committed > from {
			from = s.committed
		}
		if seg.end > from {
			n += int64(seg.end - from)
		}
	}
	return n
}

// Bytes returns the bytes of all segments on disk.
func (s *Spool) Bytes() int64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.totalBytes
}

// CorruptBytes returns the bytes dropped as corrupt since Open (including
// what Open dropped).
func (s *Spool) CorruptBytes() int64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.corrupt
}

// Close closes the spool's files. Appended records stay on disk for the
// next Open. Close is idempotent.
func (s *Spool) Close() error {
	s.appendMu.Lock()
	defer s.appendMu.Unlock()
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return nil
	}
	s.closed = true
	var first error
	if s.active != nil {
		if !s.opt.NoSync {
			if err := s.active.Sync(); err != nil {
				first = err
			}
		}
		if err := s.active.Close(); err != nil && first == nil {
			first = err
		}
		s.active = nil
	}
	for _, seg := range s.segs {
		if seg.rf != nil {
			seg.rf.Close()
			seg.rf = nil
		}
	}
	close(s.ready)
	if first != nil {
		return fmt.Errorf("spool %s: close: %w", s.dir, first)
	}
	return nil
}

package sim

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	"plumbline/model/finding"
)

// CSVWriter writes readings as the readings-file CSV of shared/CONTRACT.md
// (`time,sensor,value,unit`). Call Flush when done.
type CSVWriter struct {
	w      *bufio.Writer
	header bool
	buf    []byte
}

// NewCSVWriter returns a writer of readings CSV onto w.
func NewCSVWriter(w io.Writer) *CSVWriter { return &CSVWriter{w: bufio.NewWriterSize(w, 1<<16)} }

// Write appends one reading.
func (c *CSVWriter) Write(r Reading) error {
	if !c.header {
		c.header = true
		if _, err := c.w.WriteString("time,sensor,value,unit\n"); err != nil {
			return fmt.Errorf("write readings: %w", err)
		}
	}
	b := c.buf[:0]
	b = r.Time.UTC().AppendFormat(b, time.RFC3339Nano)
	b = append(b, ',')
	b = appendCSVField(b, r.Sensor)
	b = append(b, ',')
	b = strconv.AppendFloat(b, r.Value, 'g', -1, 64)
	b = append(b, ',')
	b = appendCSVField(b, r.Unit)
	b = append(b, '\n')
	c.buf = b
	if _, err := c.w.Write(b); err != nil {
		return fmt.Errorf("write readings: %w", err)
	}
	return nil
}

// Flush writes buffered data to the underlying writer.
func (c *CSVWriter) Flush() error { return c.w.Flush() }

func appendCSVField(b []byte, s string) []byte {
	if !strings.ContainsAny(s, ",\"\n\r") {
		return append(b, s...)
	}
	b = append(b, '"')
	b = append(b, strings.ReplaceAll(s, `"`, `""`)...)
	return append(b, '"')
}

// LineProtocolWriter writes readings as InfluxDB line protocol
// (measurement `reading`, tags `sensor` and `unit`, field `value`,
// nanosecond timestamps), as shared/CONTRACT.md accepts.
type LineProtocolWriter struct {
	w   *bufio.Writer
	buf []byte
}

// NewLineProtocolWriter returns a writer of line protocol onto w.
func NewLineProtocolWriter(w io.Writer) *LineProtocolWriter {
	return &LineProtocolWriter{w: bufio.NewWriterSize(w, 1<<16)}
}

// Write appends one reading.
func (l *LineProtocolWriter) Write(r Reading) error {
	b := append(l.buf[:0], "reading,sensor="...)
	b = appendTag(b, r.Sensor)
	b = append(b, ",unit="...)
	b = appendTag(b, r.Unit)
	b = append(b, " value="...)
	b = strconv.AppendFloat(b, r.Value, 'g', -1, 64)
	b = append(b, ' ')
	b = strconv.AppendInt(b, r.Time.UnixNano(), 10)
	b = append(b, '\n')
	l.buf = b
	if _, err := l.w.Write(b); err != nil {
		return fmt.Errorf("write readings: %w", err)
	}
	return nil
}

// Flush writes buffered data to the underlying writer.
func (l *LineProtocolWriter) Flush() error { return l.w.Flush() }

// appendTag escapes a tag value per the line protocol: commas, equals
// signs and spaces take a backslash.
func appendTag(b []byte, s string) []byte {
	for i := 0; i < len(s); i++ {
		switch s[i] {
		case ',', '=', ' ':
			b = append(b, '\\')
		}
		b = append(b, s[i])
	}
	return b
}

// WriteTruth writes ground-truth events as truth.json.
func WriteTruth(w io.Writer, truth []finding.Event) error {
	if truth == nil {
		truth = []finding.Event{}
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(truth); err != nil {
		return fmt.Errorf("write truth: %w", err)
	}
	return nil
}

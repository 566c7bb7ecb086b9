package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"reflect"
	"strconv"
	"time"

	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/score"
)

// runScore implements `plumbline score`: judge a findings file against a
// ground-truth file (model/score for the rules) and print the report as
// tables, or as JSON with --json. A poor score is not an error; bad files
// are, with every problem named by file, line and list index.
func runScore(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("score", "--truth F --findings F [--network F] [--from T --to T] [--json]", stderr)
	truthPath := fs.String("truth", "", "ground truth: JSON list of events (truth.json from simulate)")
	findingsPath := fs.String("findings", "", "findings: JSON list of findings (findings.json)")
	netPath := fs.String("network", "", "network file (GeoJSON): zones and distances along pipes")
	from := fs.String("from", "", "start of the observed period, RFC 3339 (default: earliest event or finding)")
	to := fs.String("to", "", "end of the observed period, RFC 3339 (default: latest event or finding)")
	zones := fs.Int("zones", 0, "number of zones for the false-finding rate (default: the network's, else those seen)")
	anyZone := fs.Bool("any-zone", false, "let a finding detect an event in another zone")
	maxDelay := fs.Duration("max-delay", 0, "latest a finding may be raised after an event's start and detect it (0: no limit)")
	within := fs.Float64("within", score.DefaultLocaliseWithin, "distance along pipes (m) within which the best candidate localises the event")
	asJSON := fs.Bool("json", false, "print the report as JSON")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *truthPath == "" || *findingsPath == "" {
		fmt.Fprintln(stderr, "--truth and --findings are required")
		fs.Usage()
		return errUsage
	}
	opts := score.Options{Zones: *zones, AnyZone: *anyZone, MaxDelay: *maxDelay, LocaliseWithin: *within}
	var err error
	if opts.Start, err = flagTime("--from", *from); err != nil {
		return err
	}
	if opts.End, err = flagTime("--to", *to); err != nil {
		return err
	}
	if !opts.Start.IsZero() && !opts.End.IsZero() && !opts.End.After(opts.Start) {
		return fmt.Errorf("--to %s is not after --from %s", *to, *from)
	}
	if *zones < 0 || *maxDelay < 0 || *within <= 0 {
		return errors.New("--zones and --max-delay must not be negative, --within must be positive")
	}

	var net *network.Network
	if *netPath != "" {
		if net, err = network.ReadFile(*netPath); err != nil {
			return err
		}
	}
	truth, truthErr := readTruth(*truthPath, net)
	findings, findErr := readFindings(*findingsPath)
	if err := errors.Join(truthErr, findErr); err != nil {
		return err
	}
	if err := ctx.Err(); err != nil {
		return err
	}

	r := score.Score(truth, findings, net, opts)
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(r)
	}
	return score.WriteText(stdout, &r)
}

// flagTime parses an RFC 3339 flag value; empty gives the zero time.
func flagTime(name, v string) (time.Time, error) {
	if v == "" {
		return time.Time{}, nil
	}
	t, err := time.Parse(time.RFC3339, v)
	if err != nil {
		return time.Time{}, fmt.Errorf("%s %q: not an RFC 3339 time", name, v)
	}
	return t.UTC(), nil
}

// knownKind reports whether k is a finding kind of the contract.
func knownKind(k finding.Kind) bool {
	return k == finding.Leak || k == finding.Blockage || k == finding.SensorFault
}

// readTruth reads truth.json: a JSON list of events. With a network, the
// element of every leak and blockage must be in it.
func readTruth(path string, net *network.Network) ([]finding.Event, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return parseTruth(data, path, net)
}

// parseTruth is readTruth on bytes already read.
func parseTruth(data []byte, path string, net *network.Network) ([]finding.Event, error) {
	var out []finding.Event
	err := parseList(data, path, func(i int, raw []byte, bad func(string, ...any)) {
		var e finding.Event
		if err := json.Unmarshal(raw, &e); err != nil {
			bad("%s", elementMessage(raw, err))
			return
		}
		ok := true
		check := func(cond bool, format string, args ...any) {
			if !cond {
				bad(format, args...)
				ok = false
			}
		}
		check(knownKind(e.Kind), "unknown kind %q (leak, blockage or sensor-fault)", e.Kind)
		check(e.At != "", "at is missing")
		check(!e.Start.IsZero(), "start is missing")
		if net != nil && e.At != "" {
			switch e.Kind {
			case finding.Leak, finding.Blockage:
				_, isNode := net.NodeIndex(e.At)
				_, isLink := net.LinkIndex(e.At)
				check(isNode || isLink, "%s at %q: no such node or link in the network", e.Kind, e.At)
			}
		}
		if ok {
			out = append(out, e)
		}
	})
	return out, err
}

// readFindings reads findings.json: a JSON list of findings.
func readFindings(path string) ([]finding.Finding, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return parseFindings(data, path)
}

// parseFindings is readFindings on bytes already read.
func parseFindings(data []byte, path string) ([]finding.Finding, error) {
	var out []finding.Finding
	err := parseList(data, path, func(i int, raw []byte, bad func(string, ...any)) {
		var f finding.Finding
		if err := json.Unmarshal(raw, &f); err != nil {
			bad("%s", elementMessage(raw, err))
			return
		}
		ok := true
		check := func(cond bool, format string, args ...any) {
			if !cond {
				bad(format, args...)
				ok = false
			}
		}
		check(knownKind(f.Kind), "unknown kind %q (leak, blockage or sensor-fault)", f.Kind)
		check(!f.Raised.IsZero(), "raised is missing")
		for k, c := range f.Candidates {
			check(c.ID != "", "candidates[%d]: id is missing", k)
		}
		if ok {
			out = append(out, f)
		}
	})
	return out, err
}

// parseList reads a JSON list from data and hands each element, with its
// index, to each; problems are collected as "path:line: [i]: msg" and
// returned together. null is an empty list.
func parseList(data []byte, path string, each func(i int, raw []byte, bad func(string, ...any))) error {
	var errs []error
	dec := json.NewDecoder(bytes.NewReader(data))
	tok, err := dec.Token()
	if err != nil {
		return fmt.Errorf("%s:%d: %s", path, lineAt(data, dec.InputOffset()), jsonMessage(err))
	}
	if tok == nil {
		return nil // null: an empty list
	}
	if d, ok := tok.(json.Delim); !ok || d != '[' {
		return fmt.Errorf("%s:1: want a JSON list [...], got %v", path, tok)
	}
	for i := 0; dec.More(); i++ {
		line := lineAt(data, skipSep(data, dec.InputOffset()))
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			var se *json.SyntaxError
			if errors.As(err, &se) {
				line = lineAt(data, se.Offset)
			}
			errs = append(errs, fmt.Errorf("%s:%d: [%d]: %s", path, line, i, jsonMessage(err)))
			return errors.Join(errs...) // the rest of the list cannot be read
		}
		each(i, raw, func(format string, args ...any) {
			errs = append(errs, fmt.Errorf("%s:%d: [%d]: %s", path, line, i, fmt.Sprintf(format, args...)))
		})
	}
	if _, err := dec.Token(); err != nil {
		errs = append(errs, fmt.Errorf("%s:%d: %s", path, lineAt(data, dec.InputOffset()), jsonMessage(err)))
	}
	return errors.Join(errs...)
}

// skipSep returns the offset of the first byte at or after off that is not
// white space or a comma: where the next list element begins.
func skipSep(data []byte, off int64) int64 {
	for off < int64(len(data)) {
		switch data[off] {
		case ' ', '\t', '\r', '\n', ',':
			off++
		default:
			return off
		}
	}
	return off
}

// lineAt returns the 1-based line of byte offset off.
func lineAt(data []byte, off int64) int {
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	return 1 + bytes.Count(data[:off], []byte("\n"))
}

// elementMessage explains why a list element did not decode, naming the
// key of a time that did not parse (encoding/json does not).
func elementMessage(raw []byte, err error) string {
	var pe *time.ParseError
	if errors.As(err, &pe) {
		var m map[string]any
		if json.Unmarshal(raw, &m) == nil {
			for k, v := range m {
				if s, ok := v.(string); ok && (s == pe.Value || strconv.Quote(s) == pe.Value) {
					return fmt.Sprintf("%s: %q is not an RFC 3339 time", k, s)
				}
			}
		}
	}
	return jsonMessage(err)
}

// jsonMessage shortens encoding/json messages for people.
func jsonMessage(err error) string {
	var te *json.UnmarshalTypeError
	if errors.As(err, &te) {
		want := te.Type.String()
		switch te.Type.Kind() {
		case reflect.Float32, reflect.Float64, reflect.Int, reflect.Int64:
			want = "a number"
		case reflect.String:
			want = "a string"
		case reflect.Slice:
			want = "a list"
		case reflect.Struct:
			want = "an object"
		}
		return fmt.Sprintf("%s: want %s, got JSON %s", te.Field, want, te.Value)
	}
	var pe *time.ParseError
	if errors.As(err, &pe) {
		return fmt.Sprintf("%s is not an RFC 3339 time", pe.Value)
	}
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return "unexpected end of the file"
	}
	return err.Error()
}

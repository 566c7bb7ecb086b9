package network

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"plumbline/internal/spell"
	"sort"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"
)

// Read reads a network file (shared/CONTRACT.md "Network file") from r.
// name is the file name used in messages. The file is rejected whole if
// anything in it is wrong: the error is then a *ValidationError listing
// every problem with its place. Warnings are dropped; use Parse to see
// them.
func Read(r io.Reader, name string) (*Network, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, fmt.Errorf("network %s: %w", name, err)
	}
	n, probs := Parse(data, name)
	if HasErrors(probs) {
		return nil, &ValidationError{File: name, Problems: errorsOnly(probs)}
	}
	return n, nil
}

// ReadFile reads the network file at path; see Read.
func ReadFile(path string) (*Network, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("network: %w", err)
	}
	n, probs := Parse(data, path)
	if HasErrors(probs) {
		return nil, &ValidationError{File: path, Problems: errorsOnly(probs)}
	}
	return n, nil
}

// Parse decodes and validates a network file held in data and returns
// the network with every problem found (errors and warnings, in file
// order). The network is nil if any problem is an Error.
//
// A leading UTF-8 byte order mark (EF BB BF), which many desktop GIS
// tools write, is skipped: RFC 8259 §8.1 lets a parser ignore it. It
// holds no line break, so the lines of problems are those of the file.
func Parse(data []byte, name string) (*Network, []Problem) {
	data = bytes.TrimPrefix(data, []byte(utf8BOM))
	p := &parser{data: data, file: name}
	n := p.parse()
	if HasErrors(p.probs) {
		return nil, p.probs
	}
	return n, p.probs
}

// utf8BOM is the UTF-8 encoding of the byte order mark U+FEFF.
const utf8BOM = "\xef\xbb\xbf"

// Property words of the file format, per kind (shared/CONTRACT.md).
var (
	nodeProps = map[NodeKind][]string{
		Junction:  {"elevation_m", "demand_lps", "pattern", "zone", "leak_coeff", "leak_exponent"},
		Reservoir: {"head_m", "zone"},
		Tank:      {"elevation_m", "level_m", "min_level_m", "max_level_m", "diameter_m", "zone"},
	}
	linkProps = map[LinkKind][]string{
		Pipe:  {"from", "to", "diameter_mm", "roughness", "length_m", "minor_loss", "status", "check_valve", "material", "installed", "group"},
		Pump:  {"from", "to", "curve", "speed", "status"},
		Valve: {"from", "to", "valve", "diameter_mm", "setting", "status"},
	}
	settingKeys = []string{"headloss", "viscosity_m2s", "patterns", "pattern_step"}
)

// DefaultLeakExponent is the leak exponent taken when a junction gives
// leak_coeff without leak_exponent: 0.5, the orifice (Torricelli) law,
// the FAVAD exponent of a fixed-area leak (May 1994).
const DefaultLeakExponent = 0.5

// parser holds the state of one Parse call.
type parser struct {
	data  []byte
	file  string
	probs []Problem
	// reported marks (feature index, property) pairs that already have a
	// problem, so that validation does not repeat them.
	reported map[[2]any]bool
	// lastOff and lastLine cache the last lineAt answer.
	lastOff  int64
	lastLine int
}

// feature is one raw feature with its place.
type feature struct {
	index int
	line  int
	raw   json.RawMessage
}

func (p *parser) add(pr Problem) {
	if pr.File == "" {
		pr.File = p.file
	}
	p.mark(pr.Index, pr.Property)
	p.probs = append(p.probs, pr)
}

// mark records that (feature index, property) needs no further problem.
func (p *parser) mark(index int, prop string) {
	if p.reported == nil {
		p.reported = map[[2]any]bool{}
	}
	p.reported[[2]any{index, prop}] = true
}

func (p *parser) fileProblem(line int, prop, format string, args ...any) {
	p.add(Problem{Line: line, Index: -1, Property: prop, Message: fmt.Sprintf(format, args...)})
}

func (p *parser) fileWarning(line int, prop, format string, args ...any) {
	p.add(Problem{Line: line, Index: -1, Property: prop, Message: fmt.Sprintf(format, args...), Severity: Warning})
}

// lineAt returns the 1-based line of byte offset off. Offsets mostly
// come in increasing order (feature by feature), so it counts on from
// the last one asked rather than from the start of the file.
func (p *parser) lineAt(off int64) int {
	if off > int64(len(p.data)) {
		off = int64(len(p.data))
	}
	if off < 0 {
		off = 0
	}
	if off < p.lastOff {
		p.lastOff, p.lastLine = 0, 1
	}
	if p.lastLine == 0 {
		p.lastLine = 1
	}
	p.lastLine += bytes.Count(p.data[p.lastOff:off], []byte{'\n'})
	p.lastOff = off
	return p.lastLine
}

// skipSpace moves off past JSON white space and separators to the next token.
func (p *parser) skipSpace(off int64) int64 {
	for off < int64(len(p.data)) {
		switch p.data[off] {
		case ' ', '\t', '\r', '\n', ',', ':':
			off++
			continue
		}
		break
	}
	return off
}

// syntax turns a JSON decoding error into a file problem.
func (p *parser) syntax(err error, dec *json.Decoder) {
	var se *json.SyntaxError
	switch {
	case errors.As(err, &se):
		p.fileProblem(p.lineAt(se.Offset), "", "not valid JSON: %v", se)
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		p.fileProblem(p.lineAt(int64(len(p.data))), "", "not valid JSON: unexpected end of input")
	default:
		p.fileProblem(p.lineAt(dec.InputOffset()), "", "not valid JSON: %v", err)
	}
}

// top is the top level of the file: its members with their lines, and
// the features.
type top struct {
	members  map[string]json.RawMessage
	lines    map[string]int
	order    []string
	features []feature
	sawFeat  bool
}

// scan reads the top-level object token by token so that each feature
// keeps the line it starts on.
func (p *parser) scan() (*top, bool) {
	t := &top{members: map[string]json.RawMessage{}, lines: map[string]int{}}
	dec := json.NewDecoder(bytes.NewReader(p.data))
	tok, err := dec.Token()
	if err != nil {
		p.syntax(err, dec)
		return nil, false
	}
	if d, ok := tok.(json.Delim); !ok || d != '{' {
		p.fileProblem(1, "", "a network file is a GeoJSON FeatureCollection object, got %s", tokenKind(tok))
		return nil, false
	}
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			p.syntax(err, dec)
			return nil, false
		}
		key, _ := tok.(string)
		line := p.lineAt(p.skipSpace(dec.InputOffset()))
		if key == "features" {
			t.sawFeat = true
			t.lines[key] = line
			tok, err := dec.Token()
			if err != nil {
				p.syntax(err, dec)
				return nil, false
			}
			if d, ok := tok.(json.Delim); !ok || d != '[' {
				if tok == nil {
					// "features": null: treat as an empty collection, reported below.
					continue
				}
				p.fileProblem(line, "features", "want an array of features, got %s", tokenKind(tok))
				if d, ok := tok.(json.Delim); ok && d == '{' {
					return nil, false
				}
				continue
			}
			for i := 0; dec.More(); i++ {
				start := p.skipSpace(dec.InputOffset())
				var raw json.RawMessage
				if err := dec.Decode(&raw); err != nil {
					p.syntax(err, dec)
					return nil, false
				}
				t.features = append(t.features, feature{index: i, line: p.lineAt(start), raw: raw})
			}
			if _, err := dec.Token(); err != nil { // ']'
				p.syntax(err, dec)
				return nil, false
			}
			continue
		}
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			p.syntax(err, dec)
			return nil, false
		}
		if _, dup := t.members[key]; !dup {
			t.order = append(t.order, key)
		}
		t.members[key] = raw
		t.lines[key] = line
	}
	if _, err := dec.Token(); err != nil { // '}'
		p.syntax(err, dec)
		return nil, false
	}
	if _, err := dec.Token(); err != io.EOF {
		p.fileProblem(p.lineAt(dec.InputOffset()), "", "not valid JSON: data after the end of the FeatureCollection")
		return nil, false
	}
	return t, true
}

// tokenKind names the JSON type of a token for messages.
func tokenKind(tok json.Token) string {
	switch v := tok.(type) {
	case json.Delim:
		if v == '[' {
			return "an array"
		}
		return "an object"
	case string:
		return fmt.Sprintf("string %q", v)
	case float64, json.Number:
		return fmt.Sprintf("number %v", v)
	case bool:
		return fmt.Sprintf("boolean %v", v)
	case nil:
		return "null"
	}
	return fmt.Sprintf("%v", tok)
}

// jsonKind names the JSON type of a raw value for messages, with a
// short quote of the value.
func jsonKind(raw json.RawMessage) string {
	raw = bytes.TrimSpace(raw)
	q := string(raw)
	if r := []rune(q); len(r) > 40 {
		q = string(r[:37]) + "..."
	}
	if len(raw) == 0 {
		return "nothing"
	}
	switch raw[0] {
	case '"':
		return "string " + q
	case '{':
		return "an object"
	case '[':
		return "an array"
	case 't', 'f':
		return "boolean " + q
	case 'n':
		return "null"
	}
	return "number " + q
}

func isNull(raw json.RawMessage) bool {
	raw = bytes.TrimSpace(raw)
	return len(raw) == 0 || string(raw) == "null"
}

func (p *parser) parse() *Network {
	t, ok := p.scan()
	if !ok {
		return nil
	}
	n := &Network{
		Viscosity:   DefaultViscosity,
		Patterns:    map[string][]float64{},
		PatternStep: DefaultPatternStep,
	}
	// type
	if raw, ok := t.members["type"]; !ok {
		p.fileProblem(1, "type", `missing: a network file is a GeoJSON object with "type": "FeatureCollection"`)
	} else {
		var s string
		if err := json.Unmarshal(raw, &s); err != nil || s != "FeatureCollection" {
			p.fileProblem(t.lines["type"], "type", `want "FeatureCollection", got %s`, jsonKind(raw))
		}
	}
	if !t.sawFeat {
		p.fileProblem(1, "features", "missing: a FeatureCollection needs a \"features\" array")
	}
	// settings and other foreign members
	for _, key := range t.order {
		switch key {
		case "type", "bbox":
		case "network":
			p.settings(n, t.members[key], t.lines[key])
		case "crs":
			p.fileWarning(t.lines[key], "crs", "RFC 7946 has no crs member: coordinates are read as WGS84 longitude, latitude")
			fallthrough
		default:
			if n.Extra == nil {
				n.Extra = map[string]json.RawMessage{}
			}
			n.Extra[key] = compact(t.members[key])
		}
	}

	// features
	var nodeFeat, linkFeat []feature
	type pendingLink struct{ from, to string }
	var ends []pendingLink
	for _, f := range t.features {
		fc := &featureCtx{p: p, f: f}
		kindWord, props, geom, ok := fc.envelope()
		if !ok {
			continue
		}
		switch kindWord {
		case "junction", "reservoir", "tank":
			nd := fc.node(kindWord, props, geom)
			n.Nodes = append(n.Nodes, nd)
			nodeFeat = append(nodeFeat, f)
		case "pipe", "pump", "valve":
			l, from, to := fc.link(kindWord, props, geom)
			n.Links = append(n.Links, l)
			linkFeat = append(linkFeat, f)
			ends = append(ends, pendingLink{from, to})
		}
	}
	n.Reindex()
	// resolve link ends
	for i := range n.Links {
		l := &n.Links[i]
		f := linkFeat[i]
		for _, e := range []struct {
			prop string
			id   string
			dst  *int
		}{{"from", ends[i].from, &l.From}, {"to", ends[i].to, &l.To}} {
			*e.dst = -1
			if e.id == "" {
				continue // already reported missing
			}
			if k, ok := n.NodeIndex(e.id); ok {
				*e.dst = k
				continue
			}
			msg := fmt.Sprintf("unknown node %q", e.id)
			if _, isLink := n.LinkIndex(e.id); isLink {
				msg = fmt.Sprintf("%q is a link, not a node", e.id)
			}
			p.add(Problem{Line: f.line, Index: f.index, Feature: l.ID, Property: e.prop, Message: msg})
		}
	}
	// validation of the assembled network, placed on the features
	loc := func(node bool, i int) (int, int) {
		if node {
			return nodeFeat[i].index, nodeFeat[i].line
		}
		return linkFeat[i].index, linkFeat[i].line
	}
	v := validator{n: n, file: p.file, loc: loc, refsChecked: true, settingLines: t.lines["network"]}
	for _, pr := range v.run() {
		if p.reported[[2]any{pr.Index, pr.Property}] {
			continue
		}
		p.add(pr)
	}
	sort.SliceStable(p.probs, func(i, j int) bool { return p.probs[i].Line < p.probs[j].Line })
	return n
}

// compact returns raw without insignificant white space.
func compact(raw json.RawMessage) json.RawMessage {
	var b bytes.Buffer
	if err := json.Compact(&b, raw); err != nil {
		return append(json.RawMessage(nil), raw...)
	}
	return json.RawMessage(b.Bytes())
}

// settings decodes the "network" foreign member.
func (p *parser) settings(n *Network, raw json.RawMessage, line int) {
	if isNull(raw) {
		return
	}
	var m map[string]json.RawMessage
	if err := json.Unmarshal(raw, &m); err != nil {
		p.fileProblem(line, "network", "want an object of settings, got %s", jsonKind(raw))
		return
	}
	for key, v := range m {
		prop := "network." + key
		switch key {
		case "headloss":
			var s string
			if err := json.Unmarshal(v, &s); err != nil {
				p.fileProblem(line, prop, "want a string, got %s", jsonKind(v))
				continue
			}
			switch s {
			case "hazen-williams":
				n.Headloss = HazenWilliams
			case "darcy-weisbach":
				n.Headloss = DarcyWeisbach
			default:
				p.fileProblem(line, prop, "unknown head-loss formula %q (want hazen-williams or darcy-weisbach)", s)
			}
		case "viscosity_m2s":
			var x float64
			if err := json.Unmarshal(v, &x); err != nil {
				p.fileProblem(line, prop, "want a number, got %s", jsonKind(v))
				continue
			}
			n.Viscosity = x
		case "pattern_step":
			var s string
			if err := json.Unmarshal(v, &s); err != nil {
				p.fileProblem(line, prop, "want a duration such as \"1h\" or \"15m\", got %s", jsonKind(v))
				continue
			}
			d, err := time.ParseDuration(s)
			if err != nil {
				p.fileProblem(line, prop, "want a duration such as \"1h\" or \"15m\", got %q", s)
				continue
			}
			n.PatternStep = d
		case "patterns":
			var pm map[string]json.RawMessage
			if err := json.Unmarshal(v, &pm); err != nil {
				p.fileProblem(line, prop, "want an object of name: [multipliers], got %s", jsonKind(v))
				continue
			}
			for name, pv := range pm {
				var mult []float64
				if err := json.Unmarshal(pv, &mult); err != nil || isNull(pv) {
					p.fileProblem(line, prop+"."+name, "want a list of numbers, got %s", jsonKind(pv))
					continue
				}
				if mult == nil {
					mult = []float64{}
				}
				n.Patterns[name] = mult
			}
		default:
			msg := "unknown setting (want headloss, viscosity_m2s, patterns or pattern_step)"
			if s := spell.Nearest(key, settingKeys); s != "" {
				msg = fmt.Sprintf("unknown setting, ignored (did you mean %s?)", s)
			}
			p.fileWarning(line, prop, "%s", msg)
		}
	}
}

// featureCtx decodes one feature, recording problems at its place.
type featureCtx struct {
	p    *parser
	f    feature
	id   string
	kind string
	// props is the feature's properties.
	props map[string]json.RawMessage
}

func (fc *featureCtx) problem(sev Severity, prop, format string, args ...any) {
	fc.p.add(Problem{Line: fc.f.line, Index: fc.f.index, Feature: fc.id, Property: prop,
		Message: fmt.Sprintf(format, args...), Severity: sev})
}

// envelope checks the Feature object and its id and kind, and returns
// the kind word, the properties and the raw geometry.
func (fc *featureCtx) envelope() (string, map[string]json.RawMessage, json.RawMessage, bool) {
	var obj map[string]json.RawMessage
	if err := json.Unmarshal(fc.f.raw, &obj); err != nil {
		fc.problem(Error, "", "want a GeoJSON Feature object, got %s", jsonKind(fc.f.raw))
		return "", nil, nil, false
	}
	ok := true
	if t, has := obj["type"]; !has {
		fc.problem(Error, "type", `missing: want "Feature"`)
		ok = false
	} else if s := ""; json.Unmarshal(t, &s) != nil || s != "Feature" {
		fc.problem(Error, "type", `want "Feature", got %s`, jsonKind(t))
		ok = false
	}
	var props map[string]json.RawMessage
	if raw, has := obj["properties"]; !has || isNull(raw) {
		// try to name the feature by its foreign id before complaining
		var fid string
		_ = json.Unmarshal(obj["id"], &fid)
		fc.id = fid
		fc.problem(Error, "properties", "missing: every feature needs properties with id and kind")
		return "", nil, nil, false
	} else if err := json.Unmarshal(raw, &props); err != nil {
		fc.problem(Error, "properties", "want an object, got %s", jsonKind(raw))
		return "", nil, nil, false
	}
	fc.props = props
	// id: properties.id, else the Feature's own id member (RFC 7946 §3.2).
	var fid string
	fidRaw, hasFid := obj["id"]
	if hasFid && !isNull(fidRaw) {
		if err := json.Unmarshal(fidRaw, &fid); err != nil {
			fc.problem(Error, "id", "the Feature id member must be a string, got %s", jsonKind(fidRaw))
		}
	}
	if raw, has := props["id"]; has && !isNull(raw) {
		if err := json.Unmarshal(raw, &fc.id); err != nil {
			fc.problem(Error, "id", "want a string, got %s", jsonKind(raw))
			ok = false
		} else if fid != "" && fid != fc.id {
			fc.problem(Error, "id", "properties id %q differs from the Feature id %q", fc.id, fid)
		}
	} else if fid != "" {
		fc.id = fid
	} else {
		fc.problem(Error, "id", "missing: every feature needs a unique id")
		ok = false
	}
	if fc.id == "" && ok {
		fc.problem(Error, "id", "must not be empty")
		ok = false
	} else if strings.TrimSpace(fc.id) != fc.id {
		fc.problem(Warning, "id", "id %q has leading or trailing spaces", fc.id)
	}
	raw, has := props["kind"]
	if !has || isNull(raw) {
		fc.problem(Error, "kind", "missing: want junction, reservoir, tank, pipe, pump or valve")
		return "", nil, nil, false
	}
	if err := json.Unmarshal(raw, &fc.kind); err != nil {
		fc.problem(Error, "kind", "want a string, got %s", jsonKind(raw))
		return "", nil, nil, false
	}
	switch fc.kind {
	case "junction", "reservoir", "tank", "pipe", "pump", "valve":
	default:
		fc.problem(Error, "kind", "unknown kind %q (want junction, reservoir, tank, pipe, pump or valve)", fc.kind)
		return "", nil, nil, false
	}
	if !ok {
		return "", nil, nil, false
	}
	return fc.kind, props, obj["geometry"], true
}

// number reads a numeric property; present reports whether it was given
// (null counts as absent) and valid.
func (fc *featureCtx) number(key string, required bool) (x float64, present bool) {
	raw, has := fc.props[key]
	if !has || isNull(raw) {
		if required {
			fc.missing(key)
		}
		return 0, false
	}
	if v, ok := fastNumber(raw); ok {
		return v, true
	}
	if err := json.Unmarshal(raw, &x); err != nil {
		if len(raw) > 0 && (raw[0] == '-' || (raw[0] >= '0' && raw[0] <= '9')) {
			fc.problem(Error, key, "number %s is out of range", jsonKind(raw)[len("number "):])
		} else {
			fc.problem(Error, key, "want a number, got %s", jsonKind(raw))
		}
		return 0, false
	}
	return x, true
}

func (fc *featureCtx) str(key string, required bool) (string, bool) {
	raw, has := fc.props[key]
	if !has || isNull(raw) {
		if required {
			fc.missing(key)
		}
		return "", false
	}
	if v, ok := fastString(raw); ok {
		return v, true
	}
	var s string
	if err := json.Unmarshal(raw, &s); err != nil {
		fc.problem(Error, key, "want a string, got %s", jsonKind(raw))
		return "", false
	}
	return s, true
}

// fastNumber parses raw, already valid JSON, when it is a number; JSON's
// number grammar is a subset of strconv's.
func fastNumber(raw json.RawMessage) (float64, bool) {
	if len(raw) == 0 || !(raw[0] == '-' || raw[0] >= '0' && raw[0] <= '9') {
		return 0, false
	}
	v, err := strconv.ParseFloat(string(raw), 64)
	return v, err == nil
}

// fastString returns raw, already valid JSON, as a string when it is a
// string with no escapes and valid UTF-8 (so the same as json.Unmarshal
// gives).
func fastString(raw json.RawMessage) (string, bool) {
	if len(raw) < 2 || raw[0] != '"' || raw[len(raw)-1] != '"' {
		return "", false
	}
	body := raw[1 : len(raw)-1]
	if bytes.IndexByte(body, '\\') >= 0 || !utf8.Valid(body) {
		return "", false
	}
	return string(body), true
}

func (fc *featureCtx) boolean(key string) (bool, bool) {
	raw, has := fc.props[key]
	if !has || isNull(raw) {
		return false, false
	}
	var b bool
	if err := json.Unmarshal(raw, &b); err != nil {
		fc.problem(Error, key, "want true or false, got %s", jsonKind(raw))
		return false, false
	}
	return b, true
}

// missing reports a required property that is absent, naming a likely
// misspelt property when there is one.
func (fc *featureCtx) missing(key string) {
	for k := range fc.props {
		if !fc.known(k) && spell.Nearest(k, []string{key}) != "" {
			fc.problem(Error, key, "required for a %s, missing (found %q: misspelt?)", fc.kind, k)
			return
		}
	}
	fc.problem(Error, key, "required for a %s, missing", fc.kind)
}

// known reports whether key is a property of the feature's kind.
func (fc *featureCtx) known(key string) bool {
	if key == "id" || key == "kind" {
		return true
	}
	for _, k := range fc.kindProps() {
		if k == key {
			return true
		}
	}
	return false
}

func (fc *featureCtx) kindProps() []string {
	switch fc.kind {
	case "junction":
		return nodeProps[Junction]
	case "reservoir":
		return nodeProps[Reservoir]
	case "tank":
		return nodeProps[Tank]
	case "pipe":
		return linkProps[Pipe]
	case "pump":
		return linkProps[Pump]
	case "valve":
		return linkProps[Valve]
	}
	return nil
}

// extra collects the properties not of the feature's kind, warning about
// likely misspellings and properties of another kind.
func (fc *featureCtx) extra() map[string]json.RawMessage {
	var out map[string]json.RawMessage
	keys := make([]string, 0, len(fc.props))
	for k := range fc.props {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if fc.known(k) {
			continue
		}
		if out == nil {
			out = map[string]json.RawMessage{}
		}
		out[k] = compact(fc.props[k])
		if s := spell.Nearest(k, fc.kindProps()); s != "" {
			fc.problem(Warning, k, "unknown property, kept as is (did you mean %s?)", s)
		} else if otherKind(k) {
			fc.problem(Warning, k, "not a property of a %s, kept as is but not used", fc.kind)
		}
	}
	return out
}

// otherKind reports whether key is a property of some kind.
func otherKind(key string) bool {
	for _, ps := range nodeProps {
		for _, p := range ps {
			if p == key {
				return true
			}
		}
	}
	for _, ps := range linkProps {
		for _, p := range ps {
			if p == key {
				return true
			}
		}
	}
	return false
}

// geometry decodes a Point or LineString geometry; it returns the
// positions and whether a geometry was given. want is "Point" or
// "LineString".
func (fc *featureCtx) geometry(raw json.RawMessage, want string) ([]Point, bool) {
	if isNull(raw) {
		return nil, false
	}
	var g struct {
		Type        string          `json:"type"`
		Coordinates json.RawMessage `json:"coordinates"`
	}
	if err := json.Unmarshal(raw, &g); err != nil {
		fc.problem(Error, "geometry", "want a GeoJSON geometry object or null, got %s", jsonKind(raw))
		return nil, false
	}
	if g.Type != want {
		what := "node"
		if want == "LineString" {
			what = "link"
		}
		fc.problem(Error, "geometry", "a %s (%s) needs %s geometry or null, got %q", what, fc.kind, want, g.Type)
		return nil, false
	}
	var pos [][]float64
	if want == "Point" {
		var one []float64
		if err := json.Unmarshal(g.Coordinates, &one); err != nil || isNull(g.Coordinates) {
			fc.problem(Error, "geometry", "Point coordinates: want [longitude, latitude], got %s", jsonKind(g.Coordinates))
			return nil, false
		}
		pos = [][]float64{one}
	} else {
		if err := json.Unmarshal(g.Coordinates, &pos); err != nil || isNull(g.Coordinates) {
			fc.problem(Error, "geometry", "LineString coordinates: want a list of [longitude, latitude], got %s", jsonKind(g.Coordinates))
			return nil, false
		}
		if len(pos) < 2 {
			fc.problem(Error, "geometry", "a LineString needs two or more positions, got %d (RFC 7946 §3.1.4)", len(pos))
			return nil, false
		}
	}
	pts := make([]Point, len(pos))
	for i, c := range pos {
		if len(c) < 2 {
			fc.problem(Error, "geometry", "position %d: want [longitude, latitude], got %d numbers", i, len(c))
			return nil, false
		}
		if c[0] < -180 || c[0] > 180 || c[1] < -90 || c[1] > 90 {
			fc.problem(Error, "geometry", "position %d: [%g, %g] is not a WGS84 longitude, latitude (RFC 7946 wants degrees, longitude first)", i, c[0], c[1])
			return nil, false
		}
		pts[i] = Point{Lon: c[0], Lat: c[1]}
	}
	return pts, true
}

// node decodes a node feature.
func (fc *featureCtx) node(kind string, props map[string]json.RawMessage, geom json.RawMessage) Node {
	nd := Node{ID: fc.id}
	if pts, ok := fc.geometry(geom, "Point"); ok {
		nd.Coord, nd.HasCoord = pts[0], true
	}
	nd.Zone, _ = fc.str("zone", false)
	switch kind {
	case "junction":
		nd.Kind = Junction
		nd.Elevation, _ = fc.number("elevation_m", true)
		nd.Demand, _ = fc.number("demand_lps", false)
		nd.Pattern, _ = fc.str("pattern", false)
		var hasC, hasE bool
		nd.LeakCoeff, hasC = fc.number("leak_coeff", false)
		nd.LeakExponent, hasE = fc.number("leak_exponent", false)
		if hasC && !hasE {
			nd.LeakExponent = DefaultLeakExponent
		}
	case "reservoir":
		nd.Kind = Reservoir
		nd.Head, _ = fc.number("head_m", true)
		nd.Elevation = nd.Head
	case "tank":
		nd.Kind = Tank
		nd.Elevation, _ = fc.number("elevation_m", true)
		nd.Level, _ = fc.number("level_m", true)
		nd.MinLevel, _ = fc.number("min_level_m", false)
		var has bool
		if nd.MaxLevel, has = fc.number("max_level_m", false); !has {
			nd.MaxLevel = math.Inf(1)
		}
		var hasD bool
		if nd.TankDiameter, hasD = fc.number("diameter_m", false); hasD && !(nd.TankDiameter > 0) {
			fc.problem(Error, "diameter_m", "must be positive, got %g", nd.TankDiameter)
		}
	}
	nd.Extra = fc.extra()
	return nd
}

// link decodes a link feature; from and to are the node ids ("" if
// missing or not a string).
func (fc *featureCtx) link(kind string, props map[string]json.RawMessage, geom json.RawMessage) (Link, string, string) {
	l := Link{ID: fc.id, From: -1, To: -1}
	pts, hasGeom := fc.geometry(geom, "LineString")
	if hasGeom {
		l.Geometry = pts
	}
	badGeom := !hasGeom && !isNull(geom)
	from, _ := fc.str("from", true)
	to, _ := fc.str("to", true)
	if s, ok := fc.str("status", false); ok {
		switch s {
		case "open":
			l.Status = Open
		case "closed":
			l.Status = Closed
		default:
			fc.problem(Error, "status", "unknown status %q (want open or closed)", s)
		}
	}
	switch kind {
	case "pipe":
		l.Kind = Pipe
		l.Diameter, _ = fc.number("diameter_mm", true)
		l.Roughness, _ = fc.number("roughness", true)
		var has bool
		l.Length, has = fc.number("length_m", false)
		given := props["length_m"] != nil && !isNull(props["length_m"])
		switch {
		case has || given: // wrong type, reported
		case badGeom: // reported; length unknown, not zero
			fc.p.mark(fc.f.index, "length_m")
		case hasGeom:
			l.Length = PolylineLength(pts)
		default:
			fc.problem(Error, "length_m", "required for a pipe with null geometry, missing")
		}
		l.MinorLoss, _ = fc.number("minor_loss", false)
		l.CheckValve, _ = fc.boolean("check_valve")
		l.Material, _ = fc.str("material", false)
		l.Group, _ = fc.str("group", false)
		if y, ok := fc.number("installed", false); ok {
			if y != math.Trunc(y) || math.Abs(y) > 1e6 {
				fc.problem(Error, "installed", "want a whole year such as 1978, got %g", y)
			} else {
				l.Installed = int(y)
			}
		}
	case "pump":
		l.Kind = Pump
		l.Curve = fc.curve()
		l.Speed = 1
		if s, ok := fc.number("speed", false); ok {
			l.Speed = s
		}
	case "valve":
		l.Kind = Valve
		l.Diameter, _ = fc.number("diameter_mm", true)
		if s, ok := fc.str("valve", true); ok {
			vt, known := ParseValveType(s)
			if !known {
				fc.problem(Error, "valve", "unknown valve type %q (want pressure-reducing, pressure-sustaining, flow-control, throttle or isolating)", s)
			}
			l.Valve = vt
		}
		l.Setting, l.HasSetting = fc.number("setting", false)
	}
	l.Extra = fc.extra()
	return l, from, to
}

// curve reads a pump's curve property.
func (fc *featureCtx) curve() [][2]float64 {
	raw, has := fc.props["curve"]
	if !has || isNull(raw) {
		fc.missing("curve")
		return nil
	}
	var pts [][]float64
	if err := json.Unmarshal(raw, &pts); err != nil {
		fc.problem(Error, "curve", "want a list of [flow_lps, head_m] points, got %s", jsonKind(raw))
		return nil
	}
	out := make([][2]float64, 0, len(pts))
	for i, pt := range pts {
		if len(pt) != 2 {
			fc.problem(Error, "curve", "point %d: want [flow_lps, head_m], got %d numbers", i+1, len(pt))
			return nil
		}
		out = append(out, [2]float64{pt[0], pt[1]})
	}
	return out
}

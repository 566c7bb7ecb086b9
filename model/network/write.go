package network

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"
)

// Write writes n as a network file (shared/CONTRACT.md): a GeoJSON
// FeatureCollection with the "network" settings member, the nodes in
// order, then the links in order, one feature per line. Every pipe gets
// its length_m; optional properties at their default are left out.
// Read(Write(n)) gives a network equal to n for any n that Read could
// have returned. Write does not validate n; it fails on values JSON
// cannot hold (NaN, infinities other than a tank's open MaxLevel) or on
// a link end that is not a node index.
func Write(w io.Writer, n *Network) error {
	bw := bufio.NewWriter(w)
	if err := write(bw, n); err != nil {
		return fmt.Errorf("write network: %w", err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("write network: %w", err)
	}
	return nil
}

// WriteFile writes n to path (see Write), through a temporary file in
// the same folder renamed into place, so that a reader never sees half
// a file.
func WriteFile(path string, n *Network) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, ".network-*.tmp")
	if err != nil {
		return fmt.Errorf("write network %s: %w", path, err)
	}
	tmp := f.Name()
	defer os.Remove(tmp) // no-op after the rename
	if err := Write(f, n); err != nil {
		f.Close()
		return fmt.Errorf("%s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("write network %s: %w", path, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		return fmt.Errorf("write network %s: %w", path, err)
	}
	return nil
}

// kv is one member of a JSON object, written in order.
type kv struct {
	k string
	v any
}

// object writes members in order as a compact JSON object.
func object(b *bytes.Buffer, members []kv) error {
	b.WriteByte('{')
	for i, m := range members {
		if i > 0 {
			b.WriteString(", ")
		}
		kb, _ := json.Marshal(m.k)
		b.Write(kb)
		b.WriteString(": ")
		switch v := m.v.(type) {
		case json.RawMessage:
			if !json.Valid(v) {
				return fmt.Errorf("member %q: not valid JSON", m.k)
			}
			b.Write(compact(v))
		case []kv:
			if err := object(b, v); err != nil {
				return err
			}
		default:
			vb, err := json.Marshal(v)
			if err != nil {
				return fmt.Errorf("member %q: %w", m.k, err)
			}
			b.Write(vb)
		}
	}
	b.WriteByte('}')
	return nil
}

// shortDuration formats d like time.Duration.String without the zero
// minutes and seconds ("1h", "1h30m", "15m").
func shortDuration(d time.Duration) string {
	s := d.String()
	if strings.HasSuffix(s, "m0s") {
		s = strings.TrimSuffix(s, "0s")
	}
	if strings.HasSuffix(s, "h0m") {
		s = strings.TrimSuffix(s, "0m")
	}
	return s
}

func write(w *bufio.Writer, n *Network) error {
	var b bytes.Buffer
	b.WriteString("{\n  \"type\": \"FeatureCollection\",\n  \"network\": ")
	settings := []kv{{"headloss", n.Headloss.String()}, {"viscosity_m2s", n.Viscosity}}
	if n.Headloss != HazenWilliams && n.Headloss != DarcyWeisbach {
		return fmt.Errorf("unknown head-loss formula %d", n.Headloss)
	}
	if len(n.Patterns) > 0 {
		names := make([]string, 0, len(n.Patterns))
		for k := range n.Patterns {
			names = append(names, k)
		}
		sort.Strings(names)
		ps := make([]kv, len(names))
		for i, k := range names {
			p := n.Patterns[k]
			if p == nil {
				p = []float64{}
			}
			ps[i] = kv{k, p}
		}
		settings = append(settings, kv{"patterns", ps})
	}
	settings = append(settings, kv{"pattern_step", shortDuration(n.PatternStep)})
	if err := object(&b, settings); err != nil {
		return fmt.Errorf("settings: %w", err)
	}
	extra := sortedKeys(n.Extra)
	for _, k := range extra {
		if k == "type" || k == "network" || k == "features" || k == "bbox" {
			continue
		}
		if !json.Valid(n.Extra[k]) {
			return fmt.Errorf("member %q: not valid JSON", k)
		}
		kb, _ := json.Marshal(k)
		b.WriteString(",\n  ")
		b.Write(kb)
		b.WriteString(": ")
		b.Write(compact(n.Extra[k]))
	}
	b.WriteString(",\n  \"features\": [")
	first := true
	sep := func() {
		if first {
			b.WriteString("\n    ")
			first = false
		} else {
			b.WriteString(",\n    ")
		}
	}
	for i := range n.Nodes {
		sep()
		if err := nodeFeature(&b, &n.Nodes[i]); err != nil {
			return fmt.Errorf("node %q: %w", n.Nodes[i].ID, err)
		}
	}
	for i := range n.Links {
		sep()
		if err := linkFeature(&b, n, &n.Links[i]); err != nil {
			return fmt.Errorf("link %q: %w", n.Links[i].ID, err)
		}
	}
	if !first {
		b.WriteString("\n  ")
	}
	b.WriteString("]\n}\n")
	_, err := w.Write(b.Bytes())
	return err
}

func sortedKeys(m map[string]json.RawMessage) []string {
	ks := make([]string, 0, len(m))
	for k := range m {
		ks = append(ks, k)
	}
	sort.Strings(ks)
	return ks
}

// withExtra appends the extra properties that do not clash with known ones.
func withExtra(props []kv, extra map[string]json.RawMessage) []kv {
	known := map[string]bool{}
	for _, p := range props {
		known[p.k] = true
	}
	for _, k := range sortedKeys(extra) {
		if known[k] || k == "id" || k == "kind" {
			continue
		}
		props = append(props, kv{k, extra[k]})
	}
	return props
}

func position(p Point) []float64 { return []float64{p.Lon, p.Lat} }

func nodeFeature(b *bytes.Buffer, nd *Node) error {
	var geom any
	if nd.HasCoord {
		geom = []kv{{"type", "Point"}, {"coordinates", position(nd.Coord)}}
	}
	props := []kv{{"id", nd.ID}, {"kind", nd.Kind.String()}}
	switch nd.Kind {
	case Junction:
		props = append(props, kv{"elevation_m", nd.Elevation})
		if nd.Demand != 0 {
			props = append(props, kv{"demand_lps", nd.Demand})
		}
		if nd.Pattern != "" {
			props = append(props, kv{"pattern", nd.Pattern})
		}
		if nd.LeakCoeff != 0 || nd.LeakExponent != 0 {
			props = append(props, kv{"leak_coeff", nd.LeakCoeff}, kv{"leak_exponent", nd.LeakExponent})
		}
	case Reservoir:
		props = append(props, kv{"head_m", nd.Head})
	case Tank:
		props = append(props, kv{"elevation_m", nd.Elevation}, kv{"level_m", nd.Level})
		if nd.MinLevel != 0 {
			props = append(props, kv{"min_level_m", nd.MinLevel})
		}
		if !math.IsInf(nd.MaxLevel, 1) {
			props = append(props, kv{"max_level_m", nd.MaxLevel})
		}
		if nd.TankDiameter != 0 {
			props = append(props, kv{"diameter_m", nd.TankDiameter})
		}
	default:
		return fmt.Errorf("unknown node kind %v", nd.Kind)
	}
	if nd.Zone != "" {
		props = append(props, kv{"zone", nd.Zone})
	}
	props = withExtra(props, nd.Extra)
	return object(b, []kv{{"type", "Feature"}, {"id", nd.ID}, {"geometry", geom}, {"properties", props}})
}

func linkFeature(b *bytes.Buffer, n *Network, l *Link) error {
	var geom any
	if len(l.Geometry) > 0 {
		cs := make([][]float64, len(l.Geometry))
		for i, p := range l.Geometry {
			cs[i] = position(p)
		}
		geom = []kv{{"type", "LineString"}, {"coordinates", cs}}
	}
	if l.From < 0 || l.From >= len(n.Nodes) || l.To < 0 || l.To >= len(n.Nodes) {
		return fmt.Errorf("link end (%d, %d) is not a node index", l.From, l.To)
	}
	props := []kv{{"id", l.ID}, {"kind", l.Kind.String()},
		{"from", n.Nodes[l.From].ID}, {"to", n.Nodes[l.To].ID}}
	switch l.Kind {
	case Pipe:
		props = append(props, kv{"diameter_mm", l.Diameter}, kv{"roughness", l.Roughness}, kv{"length_m", l.Length})
		if l.MinorLoss != 0 {
			props = append(props, kv{"minor_loss", l.MinorLoss})
		}
		if l.CheckValve {
			props = append(props, kv{"check_valve", true})
		}
		if l.Material != "" {
			props = append(props, kv{"material", l.Material})
		}
		if l.Installed != 0 {
			props = append(props, kv{"installed", l.Installed})
		}
		if l.Group != "" {
			props = append(props, kv{"group", l.Group})
		}
	case Pump:
		curve := make([][]float64, len(l.Curve))
		for i, pt := range l.Curve {
			curve[i] = []float64{pt[0], pt[1]}
		}
		props = append(props, kv{"curve", curve})
		if l.Speed != 1 {
			props = append(props, kv{"speed", l.Speed})
		}
	case Valve:
		props = append(props, kv{"valve", l.Valve.String()}, kv{"diameter_mm", l.Diameter})
		if l.HasSetting {
			props = append(props, kv{"setting", l.Setting})
		}
	default:
		return fmt.Errorf("unknown link kind %v", l.Kind)
	}
	if l.Status == Closed {
		props = append(props, kv{"status", "closed"})
	}
	props = withExtra(props, l.Extra)
	return object(b, []kv{{"type", "Feature"}, {"id", l.ID}, {"geometry", geom}, {"properties", props}})
}

// Package network holds the water network model: nodes (junctions,
// reservoirs, tanks), links (pipes, pumps, valves) and file-wide settings,
// with the GeoJSON (RFC 7946) reader and writer of shared/CONTRACT.md and
// the validation behind `plumbline check`.
//
// # Units
//
// Units are canonical everywhere: lengths, elevations and heads in m,
// diameters in mm, flows in L/s, pressures in m of water above ground.
// Link endpoints are node indices into Network.Nodes; ids are kept for
// files and messages. A Network owns its slices; Clone makes an
// independent copy.
//
// # Files
//
// Read, ReadFile and Parse decode a network file; Write and WriteFile
// encode one. The reader takes:
//
//   - UTF-8 text, with or without a leading byte order mark (many
//     desktop GIS tools write one; RFC 8259 §8.1 lets a parser skip it);
//   - a FeatureCollection whose node features have Point geometry and
//     link features LineString geometry (WGS84 longitude, latitude; a
//     third coordinate is ignored), or null geometry;
//   - the id from properties.id, or from the Feature's own "id" member
//     when properties has none (they must agree when both are given);
//   - a property given as null as if it were absent;
//   - a pipe's length from length_m, or else from its geometry, summed
//     great-circle segments by the haversine formula on a sphere of the
//     IUGG mean Earth radius 6371008.8 m (EarthRadius, GreatCircle);
//   - defaults: demand 0, no pattern (multiplier 1), leak exponent
//     DefaultLeakExponent (0.5) when only leak_coeff is given, min level 0,
//     max level +Inf (no bound), tank diameter 0 (unknown), pump speed 1,
//     status open, headloss hazen-williams, viscosity DefaultViscosity,
//     pattern step DefaultPatternStep;
//   - properties it does not know are kept, as compact JSON, in
//     Node.Extra and Link.Extra (top-level members in Network.Extra) and
//     written back. A likely misspelling or a property of another kind
//     gives a warning.
//
// Write puts the settings first, then nodes, then links, one feature per
// line, keys in a fixed order; it always writes a pipe's length_m and
// leaves out optional properties at their default. Read(Write(n))
// equals n for every n that Read returns.
//
// # Problems
//
// Validation returns every problem at once, in file order. A Problem
// names its file, line, feature index and id, property and message; its
// String form is "file:line: feature ID: property: message". Errors
// reject the whole file (Read returns a *ValidationError listing them
// all; Parse returns a nil network); warnings (odd but legal: a
// Hazen-Williams C outside 40-160, a diameter that looks like metres, a
// pipe shorter than the distance between its nodes, a line that ends
// away from its nodes, a part of the network cut off by closed links, a
// misspelt property) do not. Validate runs the same
// value and topology checks on a Network built in code. Nothing here
// panics on bad input.
package network

// Package network holds the water network model: nodes (junctions,
// reservoirs, tanks), links (pipes, pumps, valves) and file-wide settings,
// with the GeoJSON (RFC 7946) reader and writer of shared/CONTRACT.md and
// the validation behind `plumbline check`.
//
// Units are canonical everywhere: lengths, elevations and heads in m,
// diameters in mm, flows in L/s, pressures in m of water above ground.
// Link endpoints are node indices into Network.Nodes; ids are kept for
// files and messages. A Network owns its slices; Clone makes an
// independent copy.
package network

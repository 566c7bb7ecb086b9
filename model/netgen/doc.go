// Package netgen generates town-like water distribution networks for
// tests, benchmarks and the demo, and builds the invented demo town.
//
// # What a generated town looks like
//
// Town(Options) lays junctions on a jittered lattice (about 90 m apart). Every
// sixth lattice row and column, and the outermost ones, carry mains that
// form a looped grid; within each block between mains, streets run as
// branches off the mains, some joined through (small loops), most ending
// blind (dead ends). A few main lines are trunk mains. One or more
// reservoirs (and optionally a tank) connect to the grid through trunk
// pipes. Pipes are sized from the peak flow they would carry on a
// shortest-path tree from the sources (velocity about 1 m/s, then
// upsized until the tree estimate of peak pressure is at least 20 m),
// clamped to the size range of their class:
//
//	streets             100-150 mm
//	distribution mains  150-400 mm
//	trunk mains         250-600 mm
//
// Installation year falls from the town centre (old) to the edge (new);
// material follows the year (cast iron before 1970, ductile iron
// 1970-2000 and for large mains 1980-2000, PVC 1980-2000, PE from
// 2000), and roughness follows material and age (see roughness.go for the
// values and their sources). Elevations come from a smooth terrain (a sum
// of a few long-wavelength sinusoids and a gentle hill, 15-60 m) and the
// reservoir heads are set so that static pressure stays under about
// 75 m. Base demands are residential, 0.01-0.5 L/s per junction, with
// the "residential" and "commercial" daily patterns of Patterns.
//
// Positions are WGS84 around an invented origin (Options.Origin), placed
// from local metres on a sphere of radius network.EarthRadius, so the
// great-circle length of a pipe's geometry equals its stored length to
// well within 0.1 %.
//
// # Determinism
//
// Every output is a pure function of Options: the same Options give a
// bit-identical network, a different Seed a different one. The random
// stream is math/rand/v2's PCG, which is specified and stable across Go
// releases. There is no package state.
//
// # Units and ids
//
// Canonical units throughout (shared/CONTRACT.md): m, mm for diameters,
// L/s, m of water. Junction ids are "J-<n>", pipes "P-<n>", reservoirs
// "R-<n>", a tank "T-1"; zones "zone-<n>".
//
// # The demo town
//
// DemoTown builds Quillmere (an invented town): about 400 junctions in
// three district metered areas, "central" fed by gravity from a
// treatment works reservoir, "high" fed by a hill tank that a pumping
// station fills from the central zone, and "low" fed through a
// pressure-reducing valve. Each zone has one metered inlet link; the
// other boundary crossings are closed boundary mains (pipes with status
// closed, standing for shut boundary valves). DemoSensors places the
// instruments a utility would have on it (inlet flow meters, pressure
// loggers, tank level, pumping station flow and pressure), with topics
// "quillmere/<zone>/<sensor id>"; DemoZones says which flow sensors
// balance each zone; ZoneBoundaries finds the open links crossing each
// zone's boundary in any network.
//
// The committed files configs/demo-town.geojson,
// testdata/network/town-1k.geojson and testdata/network/town-5k.geojson
// are written by `plumbline gen` (see files_test.go for the commands)
// and a test checks they match the generator.
//
// # Memory and errors
//
// The returned *network.Network is the caller's; nothing is retained.
// Bad Options give an error naming the field; no function panics on
// bad input.
package netgen

// Package report builds the retrospective report of a replay: a Builder
// is fed every step's snapshot and detector results (the replay's OnStep
// hook), keeps fixed-size aggregates, and Finish turns them with the
// replay's findings into a Report that writes one self-contained HTML
// file (inline SVG plots drawn with gonum/plot, the plot font embedded
// once as a data URL, no script and no network reference), a JSON summary
// and a CSV summary.
//
// Memory: the Builder's size does not grow with the length of the
// period. Time series are kept in at most Options.MaxColumns bins per
// series (a plot's pixel columns); when a period outgrows them, adjacent
// bins are merged pairwise and the bin width doubles. Exact totals
// (volumes) are running sums over every step, not sums of bins. One
// record per zone per night is kept (a few hundred a year).
//
// Units: flow L/s, volume m³, pressure m of water, time UTC (hour-of-day
// profiles in each zone's own time zone). Leakage figures come from
// plumbline/model/leakage: real losses from the mean night excess (night
// window mean inflow minus the legitimate-use allowance) times the
// night-day factor of the zone's logger pressure profile under FAVAD;
// UARL and ILI where the configuration gives mains length and service
// connections.
//
// Output is deterministic: the same steps and findings give the same
// bytes, so the JSON summary can be checked against a golden file.
//
// Errors: Add fails on a step out of time order or with result slices of
// the wrong length (a broken caller); writers return I/O errors wrapped
// with the file name.
package report

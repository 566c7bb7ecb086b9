// Package web is the service's HTTP surface: health and readiness probes,
// Prometheus metrics, the JSON API and the operator page.
//
// # Routes
//
// NewHandler serves, on whatever listener the service gives it (by default
// the configured loopback address):
//
//	GET  /               the operator page (HTML, CSS and JS embedded; no outside resources)
//	GET  /static/...     the page's files
//	GET  /healthz        200 {"status": "live"} while the process serves
//	GET  /readyz         200 {"ready": true, "reasons": []} or 503 {"ready": false, "reasons": [...]}
//	GET  /metrics        Prometheus text format 0.0.4
//	GET  /api/view       the whole View (below)
//	GET  /api/zones      View.zones
//	GET  /api/sensors    View.sensors
//	GET  /api/findings   View.findings
//	GET  /api/network    MapData: nodes and links with positions, computed once
//	*    /api/alerts/... the alerts API (alerts.NewAPI), mounted with
//	                     http.StripPrefix("/api/alerts", ...); 503 when nil
//
// Other /api/ paths answer 404 with {"error": "..."}; a wrong method on a
// known path answers 405. Every answer is counted in
// plumbline_http_requests_total{route,code}.
//
// # JSON
//
// Keys are snake_case; flows in L/s, pressures, heads and levels in m,
// times RFC 3339 UTC. A NaN or infinite value of a zone, night or sensor
// (no reading, no model value) is written as null; lists are never null.
// Findings are written as model/finding writes them and alerts as
// plumbline/alerts does; a non-finite size or score there is written as 0
// (sizes are then omitted).
//
// # Metrics
//
// The provider writes its components' families (readings accepted and
// rejected, ingest lag, spool depth, step time, solver iterations ...).
// When its text has no plumbline_findings_total family, the handler adds
// one: the findings first seen in a view, by kind (a finding counts once
// while it stays in consecutive views; the service should write its own
// counter when it has one). When its text has no plumbline_alerts family,
// the handler adds the gauge of open alerts in the view by state.
//
// # The operator page
//
// The page loads /api/network once and /api/view every 5 s. The map is an
// SVG drawn in the browser: the network's projected bounds fit inside the
// SVG box less 24 px on every side, centred, north up, one scale on both
// axes (x to the right, y down from the bounds' top). Zones are shaded by
// their imbalance on a diverging scale (lake blue for less water than the
// model expects, sand for balance, rust for more); sensors are marked by
// quality; the top five candidates of each finding are drawn in the one
// colour kept for them (magenta, #e3127d) with their rank: rings for leak
// nodes, dashed traces for blockage links, dashed rings for sensors.
//
// # Operator actions and the token
//
// Reading needs no token (the service listens on loopback by default).
// The alerts API needs its bearer token for every request: the page asks
// for it in the action dialog the first time, sends it as
// "Authorization: Bearer ...", and keeps it in the tab's sessionStorage
// (gone when the tab closes; a "forget token" button drops it sooner; a
// 401 drops it and asks again). The token is never part of the HTML or of
// any answer here. The operator's name is kept the same way and sent as
// the action's "by".
//
// # Safety
//
// The page carries a Content-Security-Policy of 'self' only (no inline
// script or style attributes, no outside hosts), builds its DOM with
// textContent (no HTML from data), and states on every view that findings
// are hypotheses for field confirmation.
package web

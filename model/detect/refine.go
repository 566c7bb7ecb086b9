package detect

import (
	"fmt"
	"math"
	"strings"
	"time"

	"plumbline/model/finding"
)

// refineFor is how long a raised leak or blockage keeps gathering
// evidence for its location: a burst is raised within the hour, when a
// single hour of pressure residuals barely rises above logger noise; a day
// of them ranks the candidates far better.
const refineFor = 24 * time.Hour

// watch is a raised finding whose candidates are still being refined: the
// zone loggers' hourly residuals are compared with the baseline they had
// before the event (the live baselines relearn the new normal meanwhile).
type watch struct {
	Index   int // into state.Findings
	Zone    int
	Until   time.Time
	Sensors []int
	PreMean [][24]float64
	Sigma   []float64
	Sum     []float64
	N       []int
	// ScaleSum and ScaleN add up the zone's demand scale over the hours.
	ScaleSum float64
	ScaleN   int
	// ZonePre is the zone imbalance's normal by hour before the event;
	// ZoneSum and ZoneN add up the hourly imbalance above it: a leak's
	// size keeps being measured while its place is (the first estimate
	// carries the hours between the estimated and the true onset).
	ZonePre [24]float64
	ZoneSum float64
	ZoneN   int
	// Hours counts the hours added since the finding was raised.
	Hours int
}

// rerankEvery is how many hours of evidence a watched finding gathers
// between re-rankings (and it is re-ranked in its last hour): an hour adds
// little to a day's evidence, and each re-ranking costs a reference
// solve, the adjoint solves and a full solve per shortlisted candidate.
const rerankEvery = 3

// raise records a new finding and returns its index.
func (d *Detector) raise(f finding.Finding) int {
	if f.Candidates == nil {
		f.Candidates = []finding.Candidate{}
	}
	d.st.Findings = append(d.st.Findings, f)
	for len(d.st.Resolved) < len(d.st.Findings) {
		d.st.Resolved = append(d.st.Resolved, false)
	}
	d.raised = append(d.raised, f)
	return len(d.st.Findings) - 1
}

// watch starts refining finding idx from the evidence it was raised on.
func (d *Detector) watch(idx, zi int, ev evidence, now time.Time) {
	w := watch{Index: idx, Zone: zi, Until: now.Add(refineFor), ScaleSum: ev.scale * float64(max(ev.hours, 1)), ScaleN: max(ev.hours, 1),
		ZonePre: d.st.Zones[zi].Base.Mean}
	if ev.wI > 0 {
		w.ZoneSum, w.ZoneN = ev.dI*float64(max(ev.hours, 1)), max(ev.hours, 1)
	}
	for k, si := range ev.sensors {
		ss := &d.st.Sensors[si]
		n := int(math.Round(ev.w[k] * ss.Base.Sigma() * ss.Base.Sigma()))
		w.Sensors = append(w.Sensors, si)
		w.PreMean = append(w.PreMean, ss.Base.Mean)
		w.Sigma = append(w.Sigma, ss.Base.Sigma())
		w.Sum = append(w.Sum, ev.dr[k]*float64(n))
		w.N = append(w.N, n)
	}
	d.st.Watch = append(d.st.Watch, w)
}

// refine adds the hour starting at h to every watched finding and
// re-ranks its candidates; hourly holds each sensor's mean residual of
// the hour (NaN where none).
func (d *Detector) refine(h time.Time, hourly, zoneHourly []float64) {
	keep := d.st.Watch[:0]
	for _, w := range d.st.Watch {
		if !h.Before(w.Until) {
			continue
		}
		if sc, n := d.st.Zones[w.Zone].Scale.since(h); n > 0 {
			w.ScaleSum += sc
			w.ScaleN++
		}
		hr := d.localHour(w.Zone, h)
		if x := zoneHourly[w.Zone]; !math.IsNaN(x) {
			w.ZoneSum += x - w.ZonePre[hr]
			w.ZoneN++
		}
		for k, si := range w.Sensors {
			if x := hourly[si]; !math.IsNaN(x) && !d.st.Sensors[si].Excluded {
				w.Sum[k] += x - w.PreMean[k][hr]
				w.N[k]++
			}
		}
		w.Hours++
		if w.Hours%rerankEvery == 0 || !h.Add(time.Hour).Before(w.Until) {
			d.rerank(&w)
		}
		keep = append(keep, w)
	}
	d.st.Watch = keep
}

func (d *Detector) rerank(w *watch) {
	f := &d.st.Findings[w.Index]
	ev := evidence{zone: w.Zone, scale: w.ScaleSum / float64(w.ScaleN)}
	for k, si := range w.Sensors {
		if w.N[k] == 0 || d.st.Sensors[si].Excluded {
			continue
		}
		ev.sensors = append(ev.sensors, si)
		ev.dr = append(ev.dr, w.Sum[k]/float64(w.N[k]))
		ev.w = append(ev.w, float64(w.N[k])/(w.Sigma[k]*w.Sigma[k]))
		ev.hours = max(ev.hours, w.N[k])
	}
	if len(ev.sensors) == 0 {
		return
	}
	sg, err := d.signatures(ev)
	if err != nil {
		return
	}
	var ids []finding.Candidate
	switch f.Kind {
	case finding.Leak:
		if w.ZoneN > 0 {
			if q := w.ZoneSum / float64(w.ZoneN); q > 0 {
				f.SizeLPS = round2(q)
			}
		}
		ids = d.leakCandidates(ev, sg, f.SizeLPS)
	case finding.Blockage:
		short, _ := rank(d.blockageFits(w.Zone, ev, sg), shortlist)
		top, scores := rank(d.refineBlockages(ev, sg, short), d.cfg.Candidates)
		for i, r := range top {
			ids = append(ids, finding.Candidate{ID: d.net.Links[r.idx].ID, Score: round2(scores[i])})
		}
		if len(top) > 0 {
			f.OpenFrac = round2(top[0].size)
		}
	default:
		return
	}
	if len(ids) == 0 {
		return
	}
	changed := len(ids) != len(f.Candidates) || ids[0].ID != f.Candidates[0].ID
	f.Candidates = ids
	base := f.Evidence
	if i := strings.Index(base, " | located from "); i >= 0 {
		base = base[:i]
	}
	f.Evidence = fmt.Sprintf("%s | located from %d h of residuals (%s): best %s", base, ev.hours, describeResiduals(d, ev, 3), ids[0].ID)
	if changed {
		d.updated = append(d.updated, *f)
	}
}

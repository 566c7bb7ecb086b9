package report

import (
	"errors"
	"fmt"
	"math"
	"time"

	"plumbline/daemon/config"
	"plumbline/model/detect"
	"plumbline/model/leakage"
	"plumbline/model/telemetry"
)

// DefaultMaxColumns is the number of time bins a series keeps at most:
// about one per pixel column of a plot.
const DefaultMaxColumns = 1024

// Options set up a Builder.
type Options struct {
	// Config is the service configuration the replay ran with (network,
	// sensors, zones).
	Config *config.Config
	// N1 is the FAVAD leakage exponent for the night-day factor; 0 means
	// leakage.DefaultN1.
	N1 float64
	// MaxColumns bounds the bins of each time series; 0 means
	// DefaultMaxColumns. At least 8.
	MaxColumns int
}

// Builder accumulates what the report shows, step by step. Feed it with
// Add from one goroutine, in time order; then call Finish once.
type Builder struct {
	cfg  *config.Config
	n1   float64
	cap  int
	step time.Duration

	origin time.Time
	width  time.Duration
	first  time.Time
	last   time.Time
	steps  int

	zones   []zoneAcc
	zoneIdx map[string]int
	loggers []loggerAcc // pressure and head sensors, config order
}

type zoneAcc struct {
	z       config.Zone
	bins    []zoneBin
	loggers []int // indices into Builder.loggers
	// exact running totals
	inflowM3, expectedM3, imbalanceM3 float64
	balanceSteps                      int
	// pressure profile: per step zone mean logger pressure, by local hour
	hourSum   [24]float64
	hourN     [24]int
	nightPSum float64
	nightPN   int
	nights    []detect.NightFlow
}

// zoneBin holds the sums of one time bin of a zone.
type zoneBin struct {
	n                           int
	inflow, expected, imbalance float64
	nightThr, burstThr          float64
	nightMax, burstMax          float64
	tn                          int // steps with thresholds
}

type loggerAcc struct {
	sensor                 int // index into Config.Sensors
	id                     string
	zone                   int // zone index or -1
	bins                   []loggerBin
	steps, missing, faults int
}

// loggerBin holds the sums of one time bin of a logger's residual.
type loggerBin struct {
	n, missing, fault int
	sum               float64
}

// NewBuilder returns a Builder for o.Config.
func NewBuilder(o Options) (*Builder, error) {
	if o.Config == nil || o.Config.Network == nil {
		return nil, errors.New("report: no configuration or network")
	}
	if o.N1 == 0 {
		o.N1 = leakage.DefaultN1
	}
	if o.N1 < 0 || math.IsNaN(o.N1) || math.IsInf(o.N1, 0) {
		return nil, fmt.Errorf("report: leakage exponent N1 %v is not a non-negative number", o.N1)
	}
	if o.MaxColumns == 0 {
		o.MaxColumns = DefaultMaxColumns
	}
	if o.MaxColumns < 8 {
		return nil, fmt.Errorf("report: %d columns is too few (at least 8)", o.MaxColumns)
	}
	b := &Builder{cfg: o.Config, n1: o.N1, cap: o.MaxColumns, step: o.Config.Step, zoneIdx: map[string]int{}}
	if b.step <= 0 {
		b.step = config.DefaultStep
	}
	b.width = b.step
	for i, z := range o.Config.Zones {
		b.zoneIdx[z.ID] = i
		b.zones = append(b.zones, zoneAcc{z: z})
	}
	for i, s := range o.Config.Sensors {
		if s.Quantity != telemetry.Pressure && s.Quantity != telemetry.Head {
			continue
		}
		zi, ok := b.zoneIdx[s.Zone]
		if !ok {
			zi = -1
		}
		if zi >= 0 {
			b.zones[zi].loggers = append(b.zones[zi].loggers, len(b.loggers))
		}
		b.loggers = append(b.loggers, loggerAcc{sensor: i, id: s.ID, zone: zi})
	}
	return b, nil
}

// Add takes one step's snapshot and detector results.
func (b *Builder) Add(snap telemetry.Snapshot, res *detect.StepResult) error {
	if res == nil {
		return fmt.Errorf("report: step %s: no results", snap.Step.Format(time.RFC3339))
	}
	n := len(b.cfg.Sensors)
	if len(snap.Values) != n || len(res.Residual) != n {
		return fmt.Errorf("report: step %s: %d values and %d residuals for %d sensors",
			snap.Step.Format(time.RFC3339), len(snap.Values), len(res.Residual), n)
	}
	t := snap.Step.UTC()
	if b.steps == 0 {
		b.origin, b.first = t, t
	} else if t.Before(b.last) {
		return fmt.Errorf("report: step %s comes before %s", t.Format(time.RFC3339), b.last.Format(time.RFC3339))
	}
	b.last = t
	b.steps++
	length := snap.Length
	if length <= 0 {
		length = b.step
	}
	secs := length.Seconds()
	idx := b.index(t)

	for _, zb := range res.Zones {
		zi, ok := b.zoneIdx[zb.Zone]
		if !ok {
			continue
		}
		z := &b.zones[zi]
		if finite(zb.InflowLPS) && finite(zb.ExpectedLPS) && finite(zb.Imbalance) {
			z.inflowM3 += zb.InflowLPS * secs / 1000
			z.expectedM3 += zb.ExpectedLPS * secs / 1000
			z.imbalanceM3 += zb.Imbalance * secs / 1000
			z.balanceSteps++
			bin := z.bin(idx)
			bin.n++
			bin.inflow += zb.InflowLPS
			bin.expected += zb.ExpectedLPS
			bin.imbalance += zb.Imbalance
		}
		if finite(zb.NightThreshold) && finite(zb.BurstThreshold) {
			bin := z.bin(idx)
			if bin.tn == 0 {
				bin.nightMax, bin.burstMax = math.Inf(-1), math.Inf(-1)
			}
			bin.tn++
			bin.nightThr += zb.NightThreshold
			bin.burstThr += zb.BurstThreshold
			bin.nightMax = maxFinite(bin.nightMax, zb.NightStat)
			bin.burstMax = maxFinite(bin.burstMax, zb.BurstStat)
		}
	}
	for _, nf := range res.Nights {
		if zi, ok := b.zoneIdx[nf.Zone]; ok {
			b.zones[zi].nights = append(b.zones[zi].nights, nf)
		}
	}

	// Loggers: residual heat strip, and the zone pressure profile from
	// the measured values of usable readings.
	var zsum [64]float64
	var zn [64]int
	psum, pn := zsum[:0], zn[:0]
	if len(b.zones) > len(zsum) {
		psum, pn = make([]float64, len(b.zones)), make([]int, len(b.zones))
	} else {
		psum, pn = zsum[:len(b.zones)], zn[:len(b.zones)]
	}
	for li := range b.loggers {
		l := &b.loggers[li]
		v := snap.Values[l.sensor]
		r := res.Residual[l.sensor]
		bin := l.bin(idx)
		l.steps++
		switch {
		case v.Quality == telemetry.Missing || (v.Quality.Usable() && !finite(r)):
			bin.missing++
			l.missing++
		case !v.Quality.Usable():
			bin.fault++
			l.faults++
		default:
			bin.n++
			bin.sum += r
		}
		if v.Quality.Usable() && finite(v.Value) && l.zone >= 0 {
			psum[l.zone] += v.Value
			pn[l.zone]++
		}
	}
	for zi := range b.zones {
		if pn[zi] == 0 {
			continue
		}
		z := &b.zones[zi]
		p := psum[zi] / float64(pn[zi])
		lt := t
		if z.z.TimeZone != nil {
			lt = t.In(z.z.TimeZone)
		}
		z.hourSum[lt.Hour()] += p
		z.hourN[lt.Hour()]++
		if z.z.Night.Contains(t, z.z.TimeZone) {
			z.nightPSum += p
			z.nightPN++
		}
	}
	return nil
}

// index returns the bin of t, merging bins while t falls past the last.
func (b *Builder) index(t time.Time) int {
	for {
		i := int(t.Sub(b.origin) / b.width)
		if i < b.cap {
			return i
		}
		b.merge()
	}
}

// merge halves the number of bins of every series: bins 2k and 2k+1
// become bin k, and the bin width doubles.
func (b *Builder) merge() {
	b.width *= 2
	for zi := range b.zones {
		z := &b.zones[zi]
		out := z.bins[:0]
		for k := 0; k < len(z.bins); k += 2 {
			m := z.bins[k]
			if k+1 < len(z.bins) {
				m = mergeZone(m, z.bins[k+1])
			}
			out = append(out, m)
		}
		clear(z.bins[len(out):])
		z.bins = out
	}
	for li := range b.loggers {
		l := &b.loggers[li]
		out := l.bins[:0]
		for k := 0; k < len(l.bins); k += 2 {
			m := l.bins[k]
			if k+1 < len(l.bins) {
				o := l.bins[k+1]
				m.n += o.n
				m.missing += o.missing
				m.fault += o.fault
				m.sum += o.sum
			}
			out = append(out, m)
		}
		clear(l.bins[len(out):])
		l.bins = out
	}
}

func mergeZone(a, o zoneBin) zoneBin {
	switch {
	case a.tn == 0:
		a.nightMax, a.burstMax = o.nightMax, o.burstMax
	case o.tn > 0:
		a.nightMax = math.Max(a.nightMax, o.nightMax)
		a.burstMax = math.Max(a.burstMax, o.burstMax)
	}
	a.n += o.n
	a.tn += o.tn
	a.inflow += o.inflow
	a.expected += o.expected
	a.imbalance += o.imbalance
	a.nightThr += o.nightThr
	a.burstThr += o.burstThr
	return a
}

func (z *zoneAcc) bin(i int) *zoneBin {
	for len(z.bins) <= i {
		z.bins = append(z.bins, zoneBin{})
	}
	return &z.bins[i]
}

func (l *loggerAcc) bin(i int) *loggerBin {
	for len(l.bins) <= i {
		l.bins = append(l.bins, loggerBin{})
	}
	return &l.bins[i]
}

// Steps returns the number of steps added.
func (b *Builder) Steps() int { return b.steps }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func maxFinite(a, x float64) float64 {
	if finite(x) && x > a {
		return x
	}
	return a
}

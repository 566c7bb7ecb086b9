package calib

import (
	"fmt"
	"math"
	"runtime"
	"sort"
	"strconv"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/network"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// Problem is what is fitted: the operator's network, its sensors and the
// stored readings. Fit does not change any of it.
type Problem struct {
	// Network is the network as recorded: roughness and patterns to be
	// corrected.
	Network *network.Network
	// Sensors are the instruments, in the order of every snapshot's
	// Values.
	Sensors []telemetry.Sensor
	// Snapshots are the stored readings, one per model step, in time
	// order (any step: Fit keeps one per Settings.Interval).
	Snapshots []telemetry.Snapshot
	// Zones gives the clock (time zone) of each zone's demand pattern:
	// the hour bins of a zone are local hours there. A nil map or a
	// missing zone means UTC.
	Zones map[string]*time.Location
	// Balances names, per zone, the flow meters of its water balance (the
	// service configuration's inlets and outlets). A zone with a balance
	// is modelled inflow-matched, as the detector models it: at each
	// snapshot its junctions' demand is scaled so that the zone uses what
	// its meters measure (see the package doc); Evaluate then gives the
	// residuals the detector's baselines hold.
	Balances map[string]ZoneMeters
}

// ZoneMeters are the flow sensors (ids) of one zone's water balance. A
// meter is oriented by its link: flow towards a node of the zone is
// inflow; a meter on a link that does not cross the zone's boundary
// counts its flow as inflow when listed among the inlets, as outflow
// among the outlets (as model/detect orients them).
type ZoneMeters struct {
	Inlets, Outlets []string
}

// Settings tune a fit. The zero value means the documented defaults.
type Settings struct {
	// MaxIterations caps the Levenberg-Marquardt iterations; default 30.
	// Reaching it is Status IterationLimit, not an error.
	MaxIterations int
	// Tolerance is the relative fall of the weighted misfit below which
	// an accepted step ends the fit (Status Converged); default 1e-4.
	Tolerance float64
	// Interval is the spacing of the snapshots used: from each interval
	// (counted from midnight UTC) the first snapshot is kept; default 1 h.
	Interval time.Duration
	// MaxSnapshots caps the snapshots of the fit (not of validation);
	// default 168 (a week of hourly snapshots; of a longer window seven
	// per hour of the day, spread over its demand levels). Beyond it the snapshots
	// are chosen per hour bin and spread over the demand levels seen in
	// that bin.
	MaxSnapshots int
	// HoldOut is the share of whole days, the last ones, kept out of the
	// fit for validation; default 0.2. At least one day is held out when
	// there are two or more days; a negative value holds out none.
	HoldOut float64
	// CMin and CMax bound a Hazen-Williams group's mean C; default 40 and
	// 160 (common practice: badly tuberculated old cast iron about 40,
	// new plastic about 150, from memory of the usual C tables).
	CMin, CMax float64
	// EpsMin and EpsMax bound a Darcy-Weisbach group's mean absolute
	// roughness, mm; default 0.0015 (drawn tubing) and 10 (badly
	// corroded iron), from memory of Moody (1944).
	EpsMin, EpsMax float64
	// MultMin and MultMax bound a zone's hourly demand multiplier;
	// default 0.2 and 3 (common practice, our choice).
	MultMin, MultMax float64
	// NoWeekend fits one daily shape per zone instead of a weekday and a
	// weekend one.
	NoWeekend bool
	// DayVariation is the least day-to-day standard deviation of a
	// zone's consumption (relative) assumed when the standard errors of
	// the demand multipliers are computed; default 0.03. Consumption
	// varies from one day to the next with weather and habit by some per
	// cent (common practice, from memory); the fit estimates the spread
	// from the data and uses the larger of the two.
	DayVariation float64
	// NoPatterns and NoRoughness leave one kind of parameter out.
	NoPatterns, NoRoughness bool
	// PipeSpread is the standard deviation of one pipe's roughness about
	// its group's (of ln C, or ln ε), for the pipes the readings see one by one
	// (see the package doc); default 0.15. Pipes of one material and
	// age differ by some 10-20 % in C from one to the next in field
	// tests, and an internal diameter off its record moves the head loss
	// as a roughness change would (from memory). A negative value gives
	// no pipe its own roughness.
	PipeSpread float64
	// NoReweight keeps the weights of the sensors' accuracy through the
	// fit instead of dividing each sensor's by its noise factor after a
	// first convergence and fitting again (see the package doc).
	NoReweight bool
	// MaxRoughnessSE is the largest standard error of a roughness
	// log-multiplier that still counts as identified; default 0.2 (a
	// 95 % band of about ±40 % of C, our choice).
	MaxRoughnessSE float64
	// MaxMultiplierSE is the same for a demand multiplier; default 0.2.
	MaxMultiplierSE float64
	// SuspectFactor is the resistance factor above which a link is listed
	// as a suspected closed or throttled valve; default 10.
	SuspectFactor float64
	// SuspectCandidates is how many links the closed-valve check tries
	// with full solves; default 8. A negative value skips the check.
	SuspectCandidates int
	// SuspectSnapshots is how many fit snapshots it solves per trial;
	// default 12.
	SuspectSnapshots int
	// Workers is the number of goroutines that solve snapshots, each with
	// its own solver; default min(2, GOMAXPROCS).
	Workers int
	// Logger receives progress (one line per iteration); nil: none.
	Logger *zerolog.Logger

	// evaluating: Evaluate's setup (snapshots with a balance meter
	// unreadable stay on the patterns; the meters stay observed).
	evaluating bool
}

func (s Settings) withDefaults() Settings {
	if s.MaxIterations <= 0 {
		s.MaxIterations = 30
	}
	if s.Tolerance <= 0 {
		s.Tolerance = 1e-4
	}
	if s.Interval <= 0 {
		s.Interval = time.Hour
	}
	if s.MaxSnapshots <= 0 {
		s.MaxSnapshots = 168
	}
	if s.HoldOut == 0 {
		s.HoldOut = 0.2
	}
	if s.CMin <= 0 {
		s.CMin = 40
	}
	if s.CMax <= s.CMin {
		s.CMax = max(160, s.CMin*4)
	}
	if s.EpsMin <= 0 {
		s.EpsMin = 0.0015
	}
	if s.EpsMax <= s.EpsMin {
		s.EpsMax = max(10, s.EpsMin*10)
	}
	if s.MultMin <= 0 {
		s.MultMin = 0.2
	}
	if s.MultMax <= s.MultMin {
		s.MultMax = max(3, s.MultMin*2)
	}
	if s.DayVariation == 0 {
		s.DayVariation = 0.03
	}
	if s.DayVariation < 0 {
		s.DayVariation = 0
	}
	if s.MaxRoughnessSE <= 0 {
		s.MaxRoughnessSE = 0.2
	}
	if s.MaxMultiplierSE <= 0 {
		s.MaxMultiplierSE = 0.2
	}
	if s.PipeSpread == 0 {
		s.PipeSpread = 0.15
	}
	if s.SuspectFactor <= 1 {
		s.SuspectFactor = 10
	}
	if s.SuspectCandidates == 0 {
		s.SuspectCandidates = 8
	}
	if s.SuspectSnapshots <= 0 {
		s.SuspectSnapshots = 12
	}
	if s.Workers <= 0 {
		s.Workers = min(2, runtime.GOMAXPROCS(0))
	}
	return s
}

// priorSD is the standard deviation of the weak prior on every parameter
// (log-multiplier of roughness, demand multiplier): 1. It keeps the
// normal equations regular when the data say nothing about a
// parameter, and shrinks an estimate with a standard error s by the
// factor 1/(1+s²) toward its prior: less than 4 % for an identified one.
const priorSD = 1.0

// role is what a sensor's readings are used for.
type role uint8

const (
	roleNone     role = iota // not usable (warned)
	roleObserve              // compared with the model
	roleBoundary             // sets a tank's or reservoir's head
)

type sensorInfo struct {
	s     telemetry.Sensor
	node  int // node index or -1
	link  int // link index or -1
	role  role
	sigma float64 // one standard deviation, canonical units
	// vf is the variance factor of the fit's weights (1/(σ² vf)): 1, or
	// the noise factor a first fit found (Fit's reweighting).
	vf   float64
	pump bool // flow sensor on a pump: also switches it
	// pumpOff: a pump reading below this (L/s) is stopped.
	pumpOff float64
}

// Default accuracies when a sensor gives none (common practice, from
// memory of typical data sheets): pressure 0.2 m (0.02 bar), level and
// head 0.01 m, flow 1 % of the mean reading, at least 0.05 L/s.
const (
	defaultPressureSigma = 0.2
	defaultLevelSigma    = 0.01
	defaultFlowShare     = 0.01
	minFlowSigma         = 0.05
)

// sensors resolves every sensor against the network; bad ones are left
// out with a warning naming them.
func resolveSensors(net *network.Network, sens []telemetry.Sensor, snaps []telemetry.Snapshot, warn func(string)) []sensorInfo {
	out := make([]sensorInfo, len(sens))
	for i, s := range sens {
		si := sensorInfo{s: s, node: -1, link: -1}
		out[i] = si
		switch s.Quantity {
		case telemetry.Flow:
			l, ok := net.LinkIndex(s.At)
			if !ok {
				warn(fmt.Sprintf("sensor %s: flow at link %q, which is not in the network: left out", s.ID, s.At))
				continue
			}
			si.link = l
			si.role = roleObserve
			si.pump = net.Links[l].Kind == network.Pump
		case telemetry.Pressure, telemetry.Head, telemetry.Level:
			n, ok := net.NodeIndex(s.At)
			if !ok {
				warn(fmt.Sprintf("sensor %s: %s at node %q, which is not in the network: left out", s.ID, s.Quantity, s.At))
				continue
			}
			si.node = n
			nd := &net.Nodes[n]
			switch {
			case nd.Kind == network.Junction && s.Quantity != telemetry.Level:
				si.role = roleObserve
			case nd.Kind == network.Tank && (s.Quantity == telemetry.Level || s.Quantity == telemetry.Pressure || s.Quantity == telemetry.Head):
				si.role = roleBoundary
			case nd.Kind == network.Reservoir && s.Quantity == telemetry.Head:
				si.role = roleBoundary
			default:
				warn(fmt.Sprintf("sensor %s: %s at %s %s cannot be modelled: left out", s.ID, s.Quantity, nd.Kind, nd.ID))
				continue
			}
		default:
			warn(fmt.Sprintf("sensor %s: unknown quantity %v: left out", s.ID, s.Quantity))
			continue
		}
		// Accuracy is in the sensor's unit: its size in canonical units.
		if s.Accuracy > 0 {
			u, err := units.Lookup(s.Quantity, s.Unit)
			if err != nil {
				warn(fmt.Sprintf("sensor %s: unit %q: %v; accuracy taken as canonical", s.ID, s.Unit, err))
				si.sigma = s.Accuracy
			} else {
				si.sigma = math.Abs(u.ToCanonical(s.Accuracy))
			}
		}
		var sum, big float64
		var n int
		for _, sn := range snaps {
			if i < len(sn.Values) && sn.Values[i].Quality.Usable() && finite(sn.Values[i].Value) {
				v := math.Abs(sn.Values[i].Value)
				sum += v
				big = max(big, v)
				n++
			}
		}
		if si.sigma <= 0 {
			switch s.Quantity {
			case telemetry.Pressure:
				si.sigma = defaultPressureSigma
			case telemetry.Flow:
				si.sigma = minFlowSigma
				if n > 0 {
					si.sigma = max(minFlowSigma, defaultFlowShare*sum/float64(n))
				}
			default:
				si.sigma = defaultLevelSigma
			}
		}
		if si.pump {
			// A pump whose meter reads less than a tenth of the most it
			// reads in the window, or within 3σ of zero, is stopped
			// (our choice, as the detector does).
			si.pumpOff = max(3*si.sigma, 0.1*big)
		}
		out[i] = si
	}
	return out
}

// weightFactor returns the sensor's variance factor (at least 1).
func (si *sensorInfo) weightFactor() float64 { return max(1, si.vf) }

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// GroupOf returns the calibration group of a pipe: its `group`
// property, else its material and installation decade
// ("cast-iron-1960s"), else whichever of the two it has, else
// "unrecorded".
func GroupOf(l *network.Link) string {
	if l.Group != "" {
		return l.Group
	}
	dec := ""
	if l.Installed > 0 {
		dec = strconv.Itoa(l.Installed/10*10) + "s"
	}
	switch {
	case l.Material != "" && dec != "":
		return l.Material + "-" + dec
	case l.Material != "":
		return l.Material
	case dec != "":
		return dec
	}
	return "unrecorded"
}

// group is one roughness group.
type group struct {
	name   string
	links  []int
	length float64
	// mean is the length-weighted geometric mean roughness (C or mm) of
	// the pipes with positive roughness.
	mean float64
}

func buildGroups(net *network.Network) []group {
	idx := map[string]int{}
	var gs []group
	for l := range net.Links {
		lk := &net.Links[l]
		if lk.Kind != network.Pipe {
			continue
		}
		name := GroupOf(lk)
		gi, ok := idx[name]
		if !ok {
			gi = len(gs)
			idx[name] = gi
			gs = append(gs, group{name: name})
		}
		gs[gi].links = append(gs[gi].links, l)
	}
	for gi := range gs {
		g := &gs[gi]
		var sl, sw float64
		for _, l := range g.links {
			lk := &net.Links[l]
			g.length += lk.Length
			if lk.Roughness > 0 {
				sl += lk.Length * math.Log(lk.Roughness)
				sw += lk.Length
			}
		}
		if sw > 0 {
			g.mean = math.Exp(sl / sw)
		}
	}
	sort.SliceStable(gs, func(a, b int) bool { return gs[a].name < gs[b].name })
	return gs
}

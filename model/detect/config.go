package detect

import (
	"errors"
	"fmt"
	"time"

	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// Zone is a district whose water balance is checked: flow sensors on its
// boundary and the window of the night when consumption is lowest.
type Zone struct {
	ID string
	// Inlets and Outlets are flow sensor ids on the zone boundary. The
	// sign of each is taken from the topology: flow along a link towards
	// a node of the zone counts as inflow.
	Inlets, Outlets []string
	// NightStart and NightEnd bound the night window, as offsets from
	// local midnight (NightEnd may be less than NightStart to span
	// midnight).
	NightStart, NightEnd time.Duration
	// Location is the zone's clock (nil: UTC).
	Location *time.Location
	// NightUseLPS is the legitimate night consumption allowance, L/s.
	NightUseLPS float64
}

// Config is everything the detector needs besides the readings.
type Config struct {
	Network *network.Network
	Sensors []telemetry.Sensor
	Zones   []Zone
	// Step is the model step of the snapshots (default 5 minutes).
	Step time.Duration
	// FalseAlarmDays is the designed mean time between false alarms of
	// each test in one zone, days (default 365). Each zone runs a night
	// test, a burst test and one residual test per sensor.
	FalseAlarmDays float64
	// LearnNights is how many nights the night-flow baseline needs before
	// the night test runs (default 7); the step tests wait LearnNights
	// days too.
	LearnNights int
	// Candidates is how many ranked candidates a finding lists (default 5).
	Candidates int
	// Noise holds optional per-sensor noise floors from calibration (σ of
	// the model residual, canonical units), by sensor id.
	Noise map[string]float64
	// Trace, when set, receives one line per decision the detector takes
	// (an alarm, each hypothesis's best misfit, the explanation chosen or
	// why none was): the diagnostic an engineer reads to see why a change
	// was or was not raised. Nil costs nothing.
	Trace func(line string)
}

func (c *Config) defaults() {
	if c.Step <= 0 {
		c.Step = 5 * time.Minute
	}
	if c.FalseAlarmDays <= 0 {
		c.FalseAlarmDays = 365
	}
	if c.LearnNights <= 0 {
		c.LearnNights = 7
	}
	if c.Candidates <= 0 {
		c.Candidates = 5
	}
}

func (c *Config) validate() error {
	var errs []error
	if c.Network == nil {
		return errors.New("detector: no network")
	}
	ids := map[string]telemetry.Sensor{}
	for _, s := range c.Sensors {
		ids[s.ID] = s
		var ok bool
		if s.Quantity == telemetry.Flow {
			_, ok = c.Network.LinkIndex(s.At)
		} else {
			_, ok = c.Network.NodeIndex(s.At)
		}
		if !ok {
			errs = append(errs, fmt.Errorf("sensor %s: %s at %q, which is not in the network", s.ID, s.Quantity, s.At))
		}
	}
	for _, z := range c.Zones {
		if len(z.Inlets) == 0 {
			errs = append(errs, fmt.Errorf("zone %s: no inlet flow sensor", z.ID))
		}
		for _, id := range append(append([]string{}, z.Inlets...), z.Outlets...) {
			if s, ok := ids[id]; !ok || s.Quantity != telemetry.Flow {
				errs = append(errs, fmt.Errorf("zone %s: %q is not a flow sensor", z.ID, id))
			}
		}
	}
	return errors.Join(errs...)
}

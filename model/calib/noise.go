package calib

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"time"
)

// NoiseTable is the model residual scatter of each sensor by local hour
// of day after a calibration: what the detector starts from instead of a
// constant (shared/METHODS.md §3). `plumbline calibrate` writes it beside
// the calibrated network; run and replay read it (config
// `calibration.noise_file`).
//
// The file is JSON:
//
//	{"made": "2026-03-16T00:00:00Z", "snapshots": 336,
//	 "sensors": [{"id": "P-104", "unit": "m", "accuracy": 0.2,
//	              "sigma_by_hour": [0.21, 0.20, ..., null, ...]}]}
//
// sigma_by_hour[h] is the standard deviation of one reading's residual
// (measured − modelled with the calibrated network and patterns,
// canonical units) about that hour's mean residual, over the days of the
// calibration window, in local hour h of the sensor's zone; null where
// fewer than two values fell in the hour. accuracy is the instrument σ
// the calibration weighed the sensor with.
type NoiseTable struct {
	Made      time.Time     `json:"made"`
	Snapshots int           `json:"snapshots"`
	Sensors   []SensorNoise `json:"sensors"`
}

// SensorNoise is one sensor's row of a NoiseTable.
type SensorNoise struct {
	ID       string  `json:"id"`
	Unit     string  `json:"unit"`
	Accuracy float64 `json:"accuracy"`
	// SigmaByHour holds NaN for an hour without enough values (null in
	// the file).
	SigmaByHour [24]float64 `json:"-"`
}

type rawSensorNoise struct {
	ID          string     `json:"id"`
	Unit        string     `json:"unit"`
	Accuracy    float64    `json:"accuracy"`
	SigmaByHour []*float64 `json:"sigma_by_hour"`
}

// MarshalJSON writes NaN hours as null.
func (s SensorNoise) MarshalJSON() ([]byte, error) {
	r := rawSensorNoise{ID: s.ID, Unit: s.Unit, Accuracy: s.Accuracy, SigmaByHour: make([]*float64, 24)}
	for h, v := range s.SigmaByHour {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			r.SigmaByHour[h] = &v
		}
	}
	return json.Marshal(r)
}

// UnmarshalJSON reads a row, null hours as NaN; it wants 24 hours of
// non-negative values.
func (s *SensorNoise) UnmarshalJSON(b []byte) error {
	var r rawSensorNoise
	if err := json.Unmarshal(b, &r); err != nil {
		return err
	}
	if r.ID == "" {
		return fmt.Errorf("sensor without an id")
	}
	if len(r.SigmaByHour) != 24 {
		return fmt.Errorf("sensor %s: sigma_by_hour has %d values, want 24", r.ID, len(r.SigmaByHour))
	}
	if r.Accuracy < 0 {
		return fmt.Errorf("sensor %s: accuracy %v is negative", r.ID, r.Accuracy)
	}
	*s = SensorNoise{ID: r.ID, Unit: r.Unit, Accuracy: r.Accuracy}
	for h, v := range r.SigmaByHour {
		s.SigmaByHour[h] = math.NaN()
		if v != nil {
			if *v < 0 {
				return fmt.Errorf("sensor %s: sigma_by_hour[%d] = %v is negative", r.ID, h, *v)
			}
			s.SigmaByHour[h] = *v
		}
	}
	return nil
}

// NoiseFrom builds the table from an Evaluation of the calibrated
// network.
func NoiseFrom(ev *Evaluation, made time.Time) *NoiseTable {
	t := &NoiseTable{Made: made.UTC(), Snapshots: ev.Snapshots}
	for _, sr := range ev.Sensors {
		t.Sensors = append(t.Sensors, SensorNoise{ID: sr.ID, Unit: sr.Unit, Accuracy: sr.Sigma, SigmaByHour: sr.HourSigma})
	}
	sort.Slice(t.Sensors, func(a, b int) bool { return t.Sensors[a].ID < t.Sensors[b].ID })
	return t
}

// HourlyMeanSigma returns the σ, by hour, of an hourly mean of the
// sensor's residual at readings spaced step apart: the model part of the
// one-reading variance stays, the instrument part (accuracy², independent
// from reading to reading) shrinks by the number of readings in an hour:
// σ² − a²(1 − step/1h), at least a²·step/1h. NaN hours stay NaN.
func (s SensorNoise) HourlyMeanSigma(step time.Duration) [24]float64 {
	f := 1.0
	if step > 0 && step < time.Hour {
		f = float64(step) / float64(time.Hour)
	}
	a2 := s.Accuracy * s.Accuracy
	var out [24]float64
	for h, v := range s.SigmaByHour {
		if math.IsNaN(v) {
			out[h] = math.NaN()
			continue
		}
		out[h] = math.Sqrt(math.Max(v*v-a2*(1-f), a2*f))
	}
	return out
}

// WriteJSON writes the table as indented JSON.
func (t *NoiseTable) WriteJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(t); err != nil {
		return fmt.Errorf("noise table: %w", err)
	}
	return nil
}

// WriteNoiseFile writes the table to path.
func WriteNoiseFile(path string, t *NoiseTable) error {
	f, err := os.Create(path)
	if err != nil {
		return fmt.Errorf("noise file: %w", err)
	}
	err = t.WriteJSON(f)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("noise file %s: %w", path, err)
	}
	return nil
}

// ReadNoise decodes a table; name is used in errors (the file's path).
func ReadNoise(r io.Reader, name string) (*NoiseTable, error) {
	dec := json.NewDecoder(r)
	dec.DisallowUnknownFields()
	var t NoiseTable
	if err := dec.Decode(&t); err != nil {
		return nil, fmt.Errorf("noise file %s: %w", name, err)
	}
	seen := map[string]bool{}
	for _, s := range t.Sensors {
		if seen[s.ID] {
			return nil, fmt.Errorf("noise file %s: sensor %s listed twice", name, s.ID)
		}
		seen[s.ID] = true
	}
	return &t, nil
}

// ReadNoiseFile reads a table from path.
func ReadNoiseFile(path string) (*NoiseTable, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("noise file: %w", err)
	}
	defer f.Close()
	return ReadNoise(f, path)
}

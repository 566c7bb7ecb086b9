package config

import (
	"time"

	"go.yaml.in/yaml/v3"
)

// Defaults of the `calibration` block.
const (
	// DefaultCalibrationWindow is how much history a periodic
	// recalibration fits: a fortnight, so that the last days can be held
	// out for validation and both day types are seen (our choice).
	DefaultCalibrationWindow = 14 * 24 * time.Hour
	// MinCalibrationWindow is the shortest window: two days, one to fit
	// and one to validate on.
	MinCalibrationWindow = 48 * time.Hour
	// MinCalibrationEvery is the shortest interval between two periodic
	// recalibrations: an hour (a fit takes minutes on a large network).
	MinCalibrationEvery = time.Hour
)

// Calibration is the `calibration` block: the detector's noise by time
// of day from a calibration, and periodic recalibration inside the
// service.
//
//	calibration:
//	  noise_file: town.noise.json   # from `plumbline calibrate --out`
//	  every: 168h                   # 0 or absent: no periodic recalibration
//	  window: 336h                  # history each recalibration fits
type Calibration struct {
	// NoiseFile is the residual scatter by sensor and local hour that
	// `plumbline calibrate` writes beside its network (resolved; "" none).
	// run and replay seed a fresh detector's baselines from it.
	NoiseFile string
	// Every is the interval between periodic recalibrations in the
	// running service; 0 turns them off.
	Every time.Duration
	// Window is the history each recalibration reads from the store.
	Window time.Duration
}

type rawCalibration struct {
	NoiseFile string `yaml:"noise_file"`
	Every     string `yaml:"every"`
	Window    string `yaml:"window"`
}

func (l *loader) calibration(c *Config, raw *rawConfig, doc *yaml.Node) {
	r := raw.Calibration
	const sub = "calibration"
	if r.NoiseFile != "" {
		c.Calibration.NoiseFile = l.path(r.NoiseFile)
		l.fileExists(c.Calibration.NoiseFile, sub, "noise_file", lineOf(doc, sub, "noise_file"))
	}
	if r.Every != "" && r.Every != "0" && r.Every != "0s" {
		c.Calibration.Every = l.duration(r.Every, 0, doc, sub, "every", sub, "every")
		if c.Calibration.Every > 0 && c.Calibration.Every < MinCalibrationEvery {
			l.errf(l.file, lineOf(doc, sub, "every"), sub, "every", "must be at least %s, got %s", MinCalibrationEvery, r.Every)
		}
	}
	c.Calibration.Window = l.duration(r.Window, DefaultCalibrationWindow, doc, sub, "window", sub, "window")
	if c.Calibration.Window < MinCalibrationWindow {
		l.errf(l.file, lineOf(doc, sub, "window"), sub, "window", "must be at least %s (a day to fit and a day to validate on), got %s", MinCalibrationWindow, r.Window)
	}
}

package service

import (
	"errors"
	"fmt"
	"os"
	"time"

	"plumbline/model/calib"
	"plumbline/model/detect"
)

// SeedNoise gives a fresh detector the residual scatter by hour of day
// that a calibration measured (calib.NoiseTable, from the configuration's
// calibration.noise_file): each sensor's σ of one reading is turned into
// the σ of an hourly mean at the model step (NoiseTable.HourlyMeanSigma)
// and handed to detect.Detector.SeedNoise. Sensors of the table the
// detector does not know are reported in the joined error and skipped;
// the others are seeded. It returns how many sensors were seeded.
// Do not call it on a detector restored from a saved state: that state
// has learned its own scatter.
func SeedNoise(det *detect.Detector, tab *calib.NoiseTable, step time.Duration) (int, error) {
	if det == nil || tab == nil {
		return 0, nil
	}
	var errs []error
	n := 0
	for _, s := range tab.Sensors {
		if err := det.SeedNoise(s.ID, s.HourlyMeanSigma(step)); err != nil {
			errs = append(errs, err)
			continue
		}
		n++
	}
	if len(errs) > 0 {
		return n, fmt.Errorf("noise table: %w", errors.Join(errs...))
	}
	return n, nil
}

// seedNoise seeds a fresh detector from the adopted calibration's
// residual scatter (data_dir/calibrated.noise.json) when the pipeline
// starts on it, else from the configuration's calibration.noise_file.
// A missing or bad file is logged; the detector then learns alone.
func (s *Service) seedNoise(adopted bool) {
	path := s.cfg.Calibration.NoiseFile
	if adopted {
		if _, err := os.Stat(s.calibratedNoisePath()); err == nil {
			path = s.calibratedNoisePath()
		}
	}
	if path == "" {
		return
	}
	tab, err := calib.ReadNoiseFile(path)
	if err != nil {
		s.log.Warn().Err(err).Msg("detector noise not seeded")
		return
	}
	n, err := SeedNoise(s.pipe.Detector(), tab, s.cfg.Step)
	if err != nil {
		s.log.Warn().Err(err).Msg("noise table: some sensors not seeded")
	}
	s.log.Info().Str("file", path).Int("sensors", n).Msg("detector noise seeded from calibration residuals")
}

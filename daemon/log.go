package main

import (
	"fmt"
	"io"

	"github.com/rs/zerolog"
)

// newLogger returns the process logger: JSON lines by default, a
// human-readable console form with format "console".
func newLogger(w io.Writer, level, format string) (zerolog.Logger, error) {
	lv := zerolog.InfoLevel
	if level != "" {
		l, err := zerolog.ParseLevel(level)
		if err != nil {
			return zerolog.Nop(), fmt.Errorf("log level %q: %w", level, err)
		}
		lv = l
	}
	switch format {
	case "", "json":
	case "console":
		w = zerolog.ConsoleWriter{Out: w, TimeFormat: "15:04:05"}
	default:
		return zerolog.Nop(), fmt.Errorf("log format %q: want json or console", format)
	}
	return zerolog.New(w).Level(lv).With().Timestamp().Logger(), nil
}

package main

import (
	"context"
	"io"
)

// runCalibrate implements `plumbline calibrate`.
func runCalibrate(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("calibrate", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

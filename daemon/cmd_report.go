package main

import (
	"context"
	"io"
)

// runReport implements `plumbline report`.
func runReport(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("report", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

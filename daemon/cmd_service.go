package main

import (
	"context"
	"io"
)

// runService implements `plumbline run`.
func runService(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("run", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

package main

import (
	"context"
	"io"
)

// runSimulate implements `plumbline simulate`.
func runSimulate(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("simulate", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

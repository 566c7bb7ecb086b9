package main

import (
	"context"
	"io"
)

// runSolve implements `plumbline solve`.
func runSolve(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("solve", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

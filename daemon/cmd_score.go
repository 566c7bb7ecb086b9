package main

import (
	"context"
	"io"
)

// runScore implements `plumbline score`.
func runScore(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("score", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

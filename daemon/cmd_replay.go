package main

import (
	"context"
	"io"
)

// runReplay implements `plumbline replay`.
func runReplay(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("replay", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

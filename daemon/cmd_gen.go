package main

import (
	"context"
	"io"
)

// runGenerate implements `plumbline gen`.
func runGenerate(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("gen", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

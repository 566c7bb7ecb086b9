package main

import (
	"context"
	"io"
)

// runDemo implements `plumbline demo`.
func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("demo", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

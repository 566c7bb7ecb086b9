package main

import (
	"context"
	"io"
)

// runCheck implements `plumbline check`.
func runCheck(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("check", "[flags]", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	return errNotBuilt
}

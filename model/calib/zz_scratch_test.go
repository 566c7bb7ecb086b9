package calib

import (
	"context"
	"os"
	"testing"

	"github.com/rs/zerolog"
)

func TestZZFit5kPhases(t *testing.T) {
	if os.Getenv("ZZ") == "" {
		t.Skip()
	}
	p := benchProblem(t)
	lg := zerolog.New(zerolog.ConsoleWriter{Out: os.Stderr})
	res, err := Fit(context.Background(), p, Settings{Logger: &lg})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("pipe effects %d, iterations %d, evaluations %d, elapsed %v, suspects %d", len(res.PipeEffects), res.Iterations, res.Evaluations, res.Elapsed, len(res.Suspects))
}

package detect

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// TestSeedNoiseStartsInformedAndYieldsToData checks SeedNoise against
// the Baseline's own shrinkage formula at once, and against the sample
// variance of Gaussian residuals later: values of a known σ fed after a
// seed twice too large pull SigmaAt to σ (sample variance of a normal
// sample converges to σ², the law of large numbers; a moving window of
// 14 values leaves a relative error of about 1/√7 ≈ 38 % per bin, so the
// pooled σ is checked to 10 % and each bin to 45 %, from the χ²
// distribution with 14 degrees of freedom, from memory).
func TestSeedNoiseStartsInformedAndYieldsToData(t *testing.T) {
	d, err := New(gridConfig(gridTown()))
	if err != nil {
		t.Fatal(err)
	}
	var seed [24]float64
	for h := range seed {
		seed[h] = 0.2 + 0.01*float64(h) // a daily shape: larger by day
	}
	seed[3] = math.NaN()
	if err := d.SeedNoise("P-22", seed); err != nil {
		t.Fatal(err)
	}
	b := &d.st.Sensors[d.bySensor["P-22"]].Base
	var pooled float64
	for h, s := range seed {
		if h != 3 {
			pooled += s * s
		}
	}
	pooled /= 23
	for h := range seed {
		want := math.Sqrt(pooled)
		if h != 3 {
			want = math.Sqrt((SeedWeight*seed[h]*seed[h] + PriorWeight*pooled) / (SeedWeight + PriorWeight))
		}
		if got := b.SigmaAt(h); math.Abs(got-want) > 1e-12 {
			t.Errorf("hour %d: SigmaAt = %.6f, want %.6f (seed %.3f shrunk towards the pool)", h, got, want, seed[h])
		}
	}

	// Later the data speak: residuals with σ = 0.1 for 60 days.
	const sigma = 0.1
	for h := range seed {
		seed[h] = 2 * sigma
	}
	d2, _ := New(gridConfig(gridTown()))
	if err := d2.SeedNoise("P-22", seed); err != nil {
		t.Fatal(err)
	}
	b2 := &d2.st.Sensors[d2.bySensor["P-22"]].Base
	rng := rand.New(rand.NewPCG(7, 8))
	for range 60 {
		for h := range 24 {
			b2.Update(h, 1+sigma*rng.NormFloat64())
		}
	}
	if got := b2.Sigma(); math.Abs(got-sigma) > 0.1*sigma {
		t.Errorf("pooled σ after 60 days = %.4f, want %.4f ± 10 %% (seed was %.2f)", got, sigma, 2*sigma)
	}
	for h := range 24 {
		if got := b2.SigmaAt(h); math.Abs(got-sigma) > 0.45*sigma {
			t.Errorf("hour %d: σ after 60 days = %.4f, want %.4f ± 45 %%", h, got, sigma)
		}
	}
}

func TestSeedNoiseBadInput(t *testing.T) {
	d, err := New(gridConfig(gridTown()))
	if err != nil {
		t.Fatal(err)
	}
	var ok [24]float64
	for h := range ok {
		ok[h] = 0.1
	}
	bad := ok
	bad[5] = -1
	inf := ok
	inf[7] = math.Inf(1)
	var none [24]float64
	for h := range none {
		none[h] = math.NaN()
	}
	for _, c := range []struct {
		sensor string
		sigma  [24]float64
		want   string
	}{
		{"P-99", ok, `sensor "P-99" is not configured`},
		{"P-22", bad, "sensor P-22: hour 05: sigma -1"},
		{"P-22", inf, "sensor P-22: hour 07: sigma +Inf"},
		{"P-22", none, "sensor P-22: no hour with a sigma"},
	} {
		before := d.st.Sensors[d.bySensor["P-22"]].Base
		err := d.SeedNoise(c.sensor, c.sigma)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("SeedNoise(%s): error %v, want one containing %q", c.sensor, err, c.want)
		}
		if after := d.st.Sensors[d.bySensor["P-22"]].Base; after != before {
			t.Errorf("SeedNoise(%s) failed but changed the baseline", c.sensor)
		}
	}
}

// TestRebaseAfterModelChange: a detector learns a week on a model whose
// pipes are smoother than the truth (its residuals carry the model's
// bias), then its state moves into a detector built on the true network,
// as when the service adopts a recalibration. The residual levels jump by
// the bias it no longer has. After Rebase the baselines take the new
// levels and a quiet week raises nothing; without it the same jump is
// reported (which shows the check can fail).
func TestRebaseAfterModelChange(t *testing.T) {
	recorded := gridTown()
	truth := recorded.Clone()
	for l := range truth.Links {
		truth.Links[l].Roughness *= 0.7 // older than the records say
	}
	snaps := simulate(t, truth, 16, 3, nil)
	half := 8 * 24 * 12
	a, err := New(gridConfig(recorded))
	if err != nil {
		t.Fatal(err)
	}
	if fs := detectAll(t, a, snaps[:half]); len(fs) > 0 {
		t.Fatalf("findings while learning: %+v", fs)
	}
	st, err := a.State()
	if err != nil {
		t.Fatal(err)
	}
	run := func(rebase bool) []string {
		b, err := New(gridConfig(truth))
		if err != nil {
			t.Fatal(err)
		}
		if err := b.Restore(st); err != nil {
			t.Fatal(err)
		}
		if rebase {
			if err := b.Rebase(recorded); err != nil {
				t.Fatal(err)
			}
		}
		var out []string
		for _, f := range detectAll(t, b, snaps[half:]) {
			out = append(out, string(f.Kind)+" "+f.Evidence)
		}
		return out
	}
	for _, f := range run(true) {
		t.Errorf("after Rebase, a quiet week raised: %s", f)
	}
	if fs := run(false); len(fs) == 0 {
		t.Errorf("without Rebase the model change raised nothing: the check cannot tell")
	}
	// Another network is refused, and nothing changes.
	b, _ := New(gridConfig(truth))
	other := gridTown()
	other.Nodes[3].ID = "J-other"
	if err := b.Rebase(other); err == nil || !strings.Contains(err.Error(), "J-other") {
		t.Errorf("Rebase(another network): error %v, want one naming J-other", err)
	}
	if err := b.Rebase(nil); err == nil {
		t.Errorf("Rebase(nil): no error")
	}
}

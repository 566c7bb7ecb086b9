package leakage

import (
	"errors"
	"math"
	"testing"
)

func near(t *testing.T, what string, got, want, rel float64) {
	t.Helper()
	if d := math.Abs(got - want); d > rel*math.Abs(want) {
		t.Errorf("%s = %.10g, want %.10g (difference %.3g, tolerance %.1g relative)", what, got, want, d, rel)
	}
}

// Worked example computed by hand from the formula of Lambert, Brown,
// Takizawa and Weimer (1999), UARL (L/day) = (18·Lm + 0.8·Nc + 25·Lp)·P,
// for an invented zone: 20 km of mains, 2000 service connections with
// 15 m of private pipe each (Lp = 30 km), 50 m average pressure.
//
//	18 × 20    =   360
//	0.8 × 2000 =  1600
//	25 × 30    =   750
//	sum        =  2710 L/day per m of pressure
//	× 50 m     = 135 500 L/day
//
// With current annual real losses of 400 m³/day (400 000 L/day),
// ILI = 400 000 / 135 500 = 2.952029...
func TestUARLAndILIWorkedExample(t *testing.T) {
	s := System{MainsKm: 20, Connections: 2000, PrivateKm: 30, PressureM: 50}
	uarl, err := UARL(s)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "UARL (L/day)", uarl, 135500, 1e-12)
	ili, err := ILI(400000, uarl)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "ILI", ili, 400000.0/135500.0, 1e-12)
	near(t, "ILI (rounded by hand)", ili, 2.952, 1e-3)
	if s.InRange() {
		t.Errorf("2000 connections reported inside the formula's range (Nc > 5000)")
	}
	// UARL is linear in pressure: halving P halves it (the formula's form).
	s.PressureM = 25
	half, _ := UARL(s)
	near(t, "UARL at 25 m", half, 135500/2.0, 1e-12)
}

func TestUARLRejectsBadInput(t *testing.T) {
	for _, s := range []System{
		{MainsKm: -1, Connections: 10, PressureM: 40},
		{MainsKm: 1, Connections: -1, PressureM: 40},
		{MainsKm: 1, Connections: 1, PrivateKm: math.NaN(), PressureM: 40},
		{MainsKm: 1, Connections: 1, PressureM: math.Inf(1)},
	} {
		if _, err := UARL(s); err == nil {
			t.Errorf("UARL(%+v): no error", s)
		}
	}
	if _, err := ILI(1000, 0); !errors.Is(err, ErrNoData) {
		t.Errorf("ILI with zero UARL: err = %v, want ErrNoData", err)
	}
}

// Night-day factor, Σ_h (P_h/P_night)^N1 (Lambert 2001; FAVAD of May
// 1994), computed by hand for a zone at 60 m for 6 hours of the night and
// 45 m for the other 18 hours:
//
//	N1 = 0.5: 6 + 18·√(45/60) = 6 + 18 × 0.8660254 = 21.588457 h/day
//	N1 = 1.0: 6 + 18·0.75     = 6 + 13.5           = 19.5 h/day
//	N1 = 1.5: 6 + 18·0.75^1.5 = 6 + 18 × 0.6495191 = 17.691344 h/day
func TestNightDayFactorHandExample(t *testing.T) {
	hourly := make([]float64, 24)
	for h := range hourly {
		hourly[h] = 45
		if h < 6 {
			hourly[h] = 60
		}
	}
	for _, c := range []struct{ n1, want float64 }{{0.5, 21.588457}, {1, 19.5}, {1.5, 17.691344}} {
		got, err := NightDayFactor(hourly, 60, c.n1)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "NDF", got, c.want, 1e-7)
	}
}

// Physical limits: with no pressure variation the leak runs at its night
// rate all day (24 h/day, whatever N1); with N1 = 0 leakage does not
// depend on pressure (24 h/day). A missing hour counts as the mean of the
// others.
func TestNightDayFactorLimits(t *testing.T) {
	flat := make([]float64, 24)
	for h := range flat {
		flat[h] = 38
	}
	for _, n1 := range []float64{0.5, 1, 2.5} {
		got, _ := NightDayFactor(flat, 38, n1)
		near(t, "NDF of a flat profile", got, 24, 1e-12)
	}
	vary := []float64{60, 60, 60, 60, 55, 50, 45, 40, 40, 40, 40, 40, 40, 40, 40, 40, 40, 40, 45, 50, 55, 60, 60, 60}
	got, _ := NightDayFactor(vary, 60, 0)
	near(t, "NDF with N1 = 0", got, 24, 1e-12)
	flat[7] = math.NaN()
	got, _ = NightDayFactor(flat, 38, 1)
	near(t, "NDF with a missing hour", got, 24, 1e-12)
	if _, err := NightDayFactor(flat[:12], 38, 1); err == nil {
		t.Error("12 hours: no error")
	}
	if _, err := NightDayFactor(flat, 0, 1); err == nil {
		t.Error("zero night pressure: no error")
	}
	all := make([]float64, 24)
	for h := range all {
		all[h] = math.NaN()
	}
	if _, err := NightDayFactor(all, 30, 1); !errors.Is(err, ErrNoData) {
		t.Errorf("no data: err = %v, want ErrNoData", err)
	}
}

// Daily losses: 2 L/s for 20 h is 2 × 3.6 × 20 = 144 m³ (by hand); for
// 24 h it is the volume of 2 L/s over 86 400 s, 172.8 m³.
func TestDailyLosses(t *testing.T) {
	got, err := DailyLossesM3(2, 20)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "daily losses", got, 144, 1e-12)
	got, _ = DailyLossesM3(2, 24)
	near(t, "daily losses over 24 h", got, 2*SecondsPerDay/1000, 1e-12)
	if _, err := DailyLossesM3(math.NaN(), 24); err == nil {
		t.Error("NaN rate: no error")
	}
}

// FAVAD: a leak of 1 L/s at 40 m gives 1·(60/40)^0.5 = 1.2247449 L/s at
// 60 m (fixed-area orifice, N1 = 0.5, Torricelli) and 1.5 L/s with N1 = 1
// (May 1994; values by hand).
func TestFAVADRate(t *testing.T) {
	got, _ := FAVADRate(1, 40, 60, 0.5)
	near(t, "FAVAD N1 = 0.5", got, 1.2247449, 1e-7)
	got, _ = FAVADRate(1, 40, 60, 1)
	near(t, "FAVAD N1 = 1", got, 1.5, 1e-12)
	if _, err := FAVADRate(1, 0, 60, 1); err == nil {
		t.Error("zero reference pressure: no error")
	}
}

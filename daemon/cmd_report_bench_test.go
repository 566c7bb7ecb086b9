package main

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// Speed targets of the retrospective report (issue: replay and report of
// 30 days of 1-minute readings on the 5,000-junction town in at most 60 s;
// 365 days of 15-minute readings in at most 60 s). The readings are made
// by the simulator in the benchmark's setup (not timed); the timed part
// is the whole `plumbline report` path: read the file, align, detect,
// aggregate, write HTML, JSON and CSV. The sensors are those of
// configs/town-5k.yaml (60 pressure loggers and the zone meters).
// cpu-s/op beside ns/op is the CPU time of the timed part.
//
//	go test ./daemon -run '^$' -bench 'Report' -benchtime 1x -timeout 60m
func BenchmarkReport30Days1Minute(b *testing.B) { benchReport(b, 30, time.Minute, 5*time.Minute) }

// BenchmarkReport365Days15Minute is the year of 15-minute readings, with
// a 15-minute model step.
func BenchmarkReport365Days15Minute(b *testing.B) {
	benchReport(b, 365, 15*time.Minute, 15*time.Minute)
}

func benchReport(b *testing.B, days int, logging, step time.Duration) {
	dir := b.TempDir()
	cfgPath := benchConfig(b, dir, step)
	start := time.Date(2026, 1, 5, 0, 0, 0, 0, time.UTC)
	scen := fmt.Sprintf(`start: %s
duration: %dh
step: %s
logging_interval: %s
seed: 17
sensors: %s
events:
  - {kind: leak, at: J-2000, start: %s, size_lps: 4}
`, start.Format(time.RFC3339), 24*days, fmtDur(step), fmtDur(logging), cfgPath, start.Add(time.Duration(days)*12*time.Hour).Format(time.RFC3339))
	scenPath := filepath.Join(dir, "scenario.yaml")
	if err := os.WriteFile(scenPath, []byte(scen), 0o644); err != nil {
		b.Fatal(err)
	}
	readings := filepath.Join(dir, "readings.csv")
	var out, errb bytes.Buffer
	if code := dispatch(context.Background(), []string{"simulate", "--network", "../testdata/network/town-5k.geojson",
		"--scenario", scenPath, "--out", readings, "--truth", filepath.Join(dir, "truth.json")}, &out, &errb); code != 0 {
		b.Fatalf("simulate: %s", errb.String())
	}
	o := replayOptions{configPath: cfgPath, src: readings, noStore: true, run: "bench",
		from: start.Format(time.RFC3339), to: start.Add(time.Duration(days) * 24 * time.Hour).Format(time.RFC3339)}
	b.ResetTimer()
	var steps int
	c0 := benchCPU()
	for b.Loop() {
		files, sum, err := replayReport(context.Background(), o, nil, filepath.Join(dir, "report.html"), 0)
		if err != nil {
			b.Fatal(err)
		}
		if files.Plots == 0 || sum.Steps == 0 {
			b.Fatalf("report with %d plots over %d steps", files.Plots, sum.Steps)
		}
		steps = sum.Steps
	}
	b.ReportMetric(float64(benchCPU()-c0)/1e9/float64(b.N), "cpu-s/op")
	b.ReportMetric(float64(steps), "steps")
	b.ReportMetric(float64(days)*float64(b.N)/b.Elapsed().Seconds(), "days/s")
}

// benchConfig writes configs/town-5k.yaml with the given model step and
// its network path made absolute.
func benchConfig(b *testing.B, dir string, step time.Duration) string {
	raw, err := os.ReadFile("../configs/town-5k.yaml")
	if err != nil {
		b.Fatalf("the 5,000-junction town's configuration: %v", err)
	}
	net, err := filepath.Abs("../testdata/network/town-5k.geojson")
	if err != nil {
		b.Fatal(err)
	}
	text := strings.Replace(string(raw), "network: ../testdata/network/town-5k.geojson", "network: "+net, 1)
	text = strings.Replace(text, "\nstep: 5m\n", "\nstep: "+fmtDur(step)+"\n", 1)
	if !strings.Contains(text, "network: "+net) || !strings.Contains(text, "step: "+fmtDur(step)) {
		b.Fatal("configs/town-5k.yaml: network or step line not as expected")
	}
	p := filepath.Join(dir, "town-5k.yaml")
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		b.Fatal(err)
	}
	return p
}

// benchCPU is the process's user+system CPU time: the machine is
// shared, and CPU time is inflated much less by other work than the
// wall clock (with the readings file read on a second goroutine, CPU
// time can also exceed the wall time).
func benchCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

func fmtDur(d time.Duration) string {
	return strings.TrimSuffix(strings.TrimSuffix(d.String(), "0s"), "0m")
}

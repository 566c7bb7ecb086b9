package align_test

import (
	"fmt"
	"time"

	"plumbline/ingest/align"
	"plumbline/model/telemetry"
)

func ExampleAligner() {
	t0 := time.Date(2026, 3, 2, 1, 0, 0, 0, time.UTC)
	sensors := []telemetry.Sensor{{ID: "P-1"}, {ID: "P-2"}}
	a, err := align.New(align.Config{Step: 5 * time.Minute, Lateness: 2 * time.Minute, Sensors: sensors, SpikeK: -1},
		func(s telemetry.Snapshot) {
			for _, v := range s.Values {
				fmt.Printf("%s %s mean %.2f n=%d %v\n", s.Step.Format("15:04"), v.Sensor, v.Value, v.Count, v.Quality)
			}
		})
	if err != nil {
		fmt.Println(err)
		return
	}
	add := func(id string, min float64, v float64) {
		late := a.Add(telemetry.Reading{Sensor: id, Time: t0.Add(time.Duration(min * float64(time.Minute))), Value: v})
		if late {
			fmt.Println("late:", id, min)
		}
	}
	add("P-1", 1, 40)
	add("P-1", 3, 42)
	add("P-1", 6, 41) // step 01:05
	add("P-2", 4, 30) // out of order, within the lateness
	add("P-1", 7, 41) // watermark 01:07 = 01:05 + 2 min: step 01:00 closes
	add("P-2", 4.5, 31)
	a.Flush(t0.Add(10 * time.Minute))
	// Output:
	// 01:00 P-1 mean 41.00 n=2 ok
	// 01:00 P-2 mean 30.00 n=1 ok
	// late: P-2 4.5
	// 01:05 P-1 mean 41.00 n=2 ok
	// 01:05 P-2 mean 30.00 n=0 stale
}

package align

import (
	"encoding/binary"
	"reflect"
	"sort"
	"testing"
	"time"

	"plumbline/model/telemetry"
)

// FuzzAlignOrder: readings and their arrival delays (below the lateness)
// come from the fuzz input; arriving in that order or sorted must give the
// same snapshots. Seeds in testdata/fuzz/FuzzAlignOrder/.
func FuzzAlignOrder(f *testing.F) {
	f.Fuzz(func(t *testing.T, data []byte) {
		const step, late = time.Minute, 150 * time.Second
		sensors := []telemetry.Sensor{{ID: "A", Min: -100, Max: 100}, {ID: "B"}, {ID: "C", Accuracy: 0.1, Quantity: telemetry.Level, Unit: "m"}}
		type arrival struct {
			r   telemetry.Reading
			key time.Time
		}
		var arr []arrival
		end := t0
		for len(data) >= 6 {
			at := time.Duration(binary.LittleEndian.Uint16(data[0:2])%3600) * time.Second
			v := float64(int8(data[2])) / 4
			delay := time.Duration(int64(data[3]) * int64(late) / 256)
			r := telemetry.Reading{Sensor: sensors[int(data[4])%3].ID, Time: t0.Add(at), Value: v}
			arr = append(arr, arrival{r, r.Time.Add(delay)})
			if r.Time.After(end) {
				end = r.Time
			}
			if data[5]&1 == 1 { // a repeat
				arr = append(arr, arrival{r, r.Time.Add(delay / 2)})
			}
			data = data[6:]
		}
		cfg := Config{Step: step, Lateness: late, Sensors: sensors, StuckAfter: 5 * time.Minute, SpikeMinHistory: 2, SpikeWindow: 4}
		run := func(order []arrival) []telemetry.Snapshot {
			var out []telemetry.Snapshot
			a, err := New(cfg, func(s telemetry.Snapshot) { out = append(out, s) })
			if err != nil {
				t.Fatal(err)
			}
			for _, x := range order {
				if a.Add(x.r) {
					t.Fatalf("reading %v late", x.r)
				}
				if n, bound := a.Stats().Open, int(late/step)+2; n > bound {
					t.Fatalf("%d open steps, bound %d", n, bound)
				}
			}
			a.Flush(end.Add(2 * step))
			return out
		}
		live := append([]arrival(nil), arr...)
		sort.SliceStable(live, func(i, j int) bool { return live[i].key.Before(live[j].key) })
		sorted := append([]arrival(nil), arr...)
		sort.SliceStable(sorted, func(i, j int) bool { return sorted[i].r.Time.Before(sorted[j].r.Time) })
		a, b := run(live), run(sorted)
		if !reflect.DeepEqual(a, b) {
			t.Fatalf("live and sorted differ:\nlive   %+v\nsorted %+v", a, b)
		}
	})
}

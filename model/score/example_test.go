package score_test

import (
	"fmt"
	"time"

	"plumbline/model/finding"
	"plumbline/model/score"
)

// A leak found three hours after it began, at the second-best candidate;
// and a finding raised before any leak began, which is false.
func ExampleScore() {
	t0 := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
	truth := []finding.Event{{Kind: finding.Leak, At: "J-7", Zone: "north", Start: t0.Add(2 * time.Hour), SizeLPS: 1.2}}
	findings := []finding.Finding{
		{Kind: finding.Leak, Zone: "north", Raised: t0.Add(time.Hour), Candidates: []finding.Candidate{{ID: "J-2", Score: 0.6}}},
		{Kind: finding.Leak, Zone: "north", Raised: t0.Add(5 * time.Hour), Candidates: []finding.Candidate{{ID: "J-6", Score: 0.9}, {ID: "J-7", Score: 0.8}}},
	}
	r := score.Score(truth, findings, nil, score.Options{Start: t0, End: t0.Add(30 * 24 * time.Hour), Zones: 2})
	fmt.Println("detected", r.Overall.Detected, "missed", r.Overall.Missed, "false", *r.Overall.FalseFindings)
	fmt.Println("false per zone per 30 days", *r.Overall.FalsePerZonePer30d)
	fmt.Println("time to detect", r.Overall.TimeToDetect.Median, "rank", r.Events[0].Rank)
	fmt.Println(r.FalseFindings[0].Reason)
	// Output:
	// detected 1 missed 0 false 1
	// false per zone per 30 days 0.5
	// time to detect 3h0m0s rank 2
	// raised before any leak event it could detect had started
}

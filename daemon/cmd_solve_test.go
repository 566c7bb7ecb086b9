package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"sort"
	"strings"
	"testing"
)

// The --json output has exactly the keys the contract names, and the
// solution it prints keeps mass balance: what the sources give equals
// what the junctions take (Kirchhoff's junction rule at network scale).
func TestSolveJSON(t *testing.T) {
	var out, errb bytes.Buffer
	code := dispatch(context.Background(), []string{"solve", "--network", "../testdata/network/two-loop.geojson", "--demand-multiplier", "1.5", "--json"}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	var raw map[string]json.RawMessage
	if err := json.Unmarshal(out.Bytes(), &raw); err != nil {
		t.Fatalf("output is not JSON: %v", err)
	}
	var keys []string
	for k := range raw {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	if got, want := strings.Join(keys, ","), "converged,iterations,links,max_imbalance_lps,nodes"; got != want {
		t.Errorf("top-level keys %s, want %s", got, want)
	}
	var sol struct {
		Converged bool `json:"converged"`
		Nodes     []map[string]any
		Links     []map[string]any
	}
	if err := json.Unmarshal(out.Bytes(), &sol); err != nil {
		t.Fatal(err)
	}
	if !sol.Converged {
		t.Error("not converged")
	}
	wantNode := "demand_lps,head_m,id,leak_lps,pressure_m"
	wantLink := "flow_lps,headloss_m,id,status,velocity_ms"
	supplied, taken := 0.0, 0.0
	for _, n := range sol.Nodes {
		if got := sortedKeys(n); got != wantNode {
			t.Fatalf("node keys %s, want %s", got, wantNode)
		}
		q := n["demand_lps"].(float64) + n["leak_lps"].(float64)
		if q < 0 {
			supplied -= q
		} else {
			taken += q
		}
	}
	for _, l := range sol.Links {
		if got := sortedKeys(l); got != wantLink {
			t.Fatalf("link keys %s, want %s", got, wantLink)
		}
	}
	if math.Abs(supplied-taken) > 1e-6 {
		t.Errorf("sources supply %.9f L/s, junctions take %.9f L/s", supplied, taken)
	}
}

func TestSolveRejectsBadFile(t *testing.T) {
	var out, errb bytes.Buffer
	code := dispatch(context.Background(), []string{"solve", "--network", "../testdata/network/duplicate-ids.bad.geojson"}, &out, &errb)
	if code == 0 {
		t.Fatal("a file with errors solved")
	}
	if !strings.Contains(errb.String(), "duplicate") {
		t.Errorf("error does not say what is wrong: %s", errb.String())
	}
}

func sortedKeys(m map[string]any) string {
	var ks []string
	for k := range m {
		ks = append(ks, k)
	}
	sort.Strings(ks)
	return strings.Join(ks, ",")
}

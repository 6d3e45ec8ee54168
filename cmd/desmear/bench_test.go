package main

import (
	"context"
	"encoding/json"
	"strings"
	"testing"
)

// desmear bench --size small --json prints one JSON object with the
// documented figures, all positive (the fixed cost may be 0 when it is
// within the noise of the iterations); nothing is timed against a bound.
func TestBenchCommandJSON(t *testing.T) {
	code, stdout, stderr := runCLI(t, context.Background(), "bench", "--size", "small", "--json")
	if code != 0 {
		t.Fatalf("exit %d\nstdout:\n%s\nstderr:\n%s", code, stdout, stderr)
	}
	if stderr != "" {
		t.Errorf("stderr is not a terminal, yet bench wrote to it: %q", stderr)
	}
	var r map[string]any
	if err := json.Unmarshal([]byte(stdout), &r); err != nil {
		t.Fatalf("stdout is not one JSON object: %v\n%s", err, stdout)
	}
	if r["size"] != "small" {
		t.Errorf("size = %v, want small", r["size"])
	}
	for _, k := range []string{"triad_gbs", "sweep_ms", "iteration_ms", "iteration_floor_ratio", "toys_per_s",
		"fill_entries_per_s", "parquet_events_per_s", "probes_s", "peak_rss_bytes", "unfolding_ms", "sweep_floor_ratio", "iteration_loglik_ms",
		"parquet_decode_events_per_s", "parquet_decode_ratio", "parquet_events_per_cpu_s", "parquet_decode_events_per_cpu_s", "parquet_decode_cpu_ratio",
		"job_s", "job_fill_s", "job_unfold_s", "job_peak_rss_bytes", "job_events"} {
		if v, ok := r[k].(float64); !ok || !(v > 0) {
			t.Errorf("%s = %v, want a positive number", k, r[k])
		}
	}
	if v, ok := r["unfolding_fixed_ms"].(float64); !ok || v < 0 {
		t.Errorf("unfolding_fixed_ms = %v, want a number ≥ 0", r["unfolding_fixed_ms"])
	}
	if s, _ := r["byte_model"].(string); !strings.Contains(s, "triad") {
		t.Errorf("byte_model does not say how the floor is counted: %q", s)
	}
}

func TestBenchCommandTableAndUsage(t *testing.T) {
	ctx := context.Background()
	code, stdout, _ := runCLI(t, ctx, "bench")
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	for _, want := range []string{"triad bandwidth", "marginal iteration", "bandwidth floor", "Parquet decoding", "whole job", "byte model:"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("the table lacks %q:\n%s", want, stdout)
		}
	}
	code, _, stderr := runCLI(t, ctx, "bench", "--size", "huge")
	if code != exitUsage || !strings.Contains(stderr, "small, medium, fine") {
		t.Errorf("--size huge: exit %d, stderr %q; want usage error naming the sizes", code, stderr)
	}
}

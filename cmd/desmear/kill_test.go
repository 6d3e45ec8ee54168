package main

import (
	"encoding/json"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

// stableSums returns treeSums of dir without the files that differ
// from run to run for the same inputs: ROOT files (they record their
// write times) and, for the demo, the JSON and HTML files that record
// the hashes of its ROOT inputs. A missing dir gives nil.
func stableSums(t *testing.T, dir string, demo bool) map[string]string {
	t.Helper()
	if _, err := os.Stat(dir); err != nil {
		return nil
	}
	sums := treeSums(t, dir)
	for name := range sums {
		if strings.HasSuffix(name, ".root") || demo && (strings.HasSuffix(name, ".json") || strings.HasSuffix(name, ".html")) {
			sums[name] = "varies"
		}
	}
	return sums
}

// sameSums reports whether two sum maps are equal.
func sameSums(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if b[k] != v {
			return false
		}
	}
	return true
}

// The real program killed with SIGKILL at moments drawn with a fixed
// seed over the length of a complete run, for demo, response and
// unfold, each without --force (nothing there before) and with --force
// over a complete earlier output: afterwards the target is absent, or
// the complete earlier output byte for byte, or a complete new one
// (the file set and contents of an uninterrupted run), never a mix. The
// JSON files left must parse. A kill cannot be caught, so this checks
// that the output is installed in one step (common practice: write
// under a temporary name, rename into place). With the demo's inputs
// installed before its analysis (as they once were), several of these
// kills leave inputs without a result and the test fails.
func TestKillLeavesWholeOutputs(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the binary and runs it; skipped with -short")
	}
	bin := buildDesmear(t)
	base := t.TempDir()
	run := func(args ...string) {
		t.Helper()
		if out, err := exec.Command(bin, args...).CombinedOutput(); err != nil {
			t.Fatalf("desmear %s: %v\n%s", strings.Join(args, " "), err, out)
		}
	}
	inputs := filepath.Join(base, "inputs")
	run("demo", "--out", inputs, "--events", "20000", "--no-report", "-q")
	analysisFile := filepath.Join(inputs, "analysis.yaml")
	rng := rand.New(rand.NewPCG(14, 14))
	for _, c := range []struct {
		name   string
		target string // the output the command writes
		demo   bool
		args   []string // the command line, the seed of the new output last
	}{
		{"demo", filepath.Join(base, "demo"), true, []string{"demo", "--out", filepath.Join(base, "demo"), "--events", "20000", "--no-report", "-q", "--seed"}},
		{"response", filepath.Join(base, "resp"), false, []string{"response", analysisFile, "--out", filepath.Join(base, "resp"), "-q"}},
		{"unfold", filepath.Join(inputs, "result"), false, []string{"unfold", analysisFile, "--no-report", "-q"}},
	} {
		for _, force := range []bool{false, true} {
			args := slices.Clone(c.args)
			if c.demo {
				args = append(args, "1")
			}
			// The earlier output, and a complete new one to compare
			// with, with the time a complete run takes.
			os.RemoveAll(c.target)
			start := time.Now()
			run(append(args, "--force")...)
			took := time.Since(start)
			newSums := stableSums(t, c.target, c.demo)
			earlier := map[string]string(nil)
			if force {
				if c.demo {
					args[len(args)-1] = "2" // the earlier demo has another seed
					os.RemoveAll(c.target)
					run(args...)
					args[len(args)-1] = "1"
				}
				earlier = treeSums(t, c.target)
				args = append(args, "--force")
			} else {
				os.RemoveAll(c.target)
			}
			for k := range 6 {
				at := time.Duration(rng.Float64() * float64(took))
				cmd := exec.Command(bin, args...)
				if err := cmd.Start(); err != nil {
					t.Fatal(err)
				}
				time.Sleep(at)
				cmd.Process.Kill()
				cmd.Wait()
				what := c.name
				if force {
					what += " --force"
				}
				switch got := stableSums(t, c.target, c.demo); {
				case got == nil && !force:
				case force && sameSums(treeSums(t, c.target), earlier):
				case sameSums(got, newSums):
				default:
					t.Errorf("%s killed after %v (kill %d): %s is neither absent, nor the earlier output, nor the complete new one: %d files", what, at, k, c.target, len(got))
				}
				filepath.WalkDir(c.target, func(p string, d os.DirEntry, err error) error {
					if err == nil && strings.HasSuffix(p, ".json") {
						b, _ := os.ReadFile(p)
						if !json.Valid(b) {
							t.Errorf("%s killed after %v: %s does not parse", what, at, p)
						}
					}
					return nil
				})
				if !force {
					os.RemoveAll(c.target)
				} else if !sameSums(treeSums(t, c.target), earlier) {
					// Start the next kill from the earlier output again.
					os.RemoveAll(c.target)
					if c.demo {
						args[len(args)-2] = "2"
						run(args...)
						args[len(args)-2] = "1"
					} else {
						run(args...)
					}
					earlier = treeSums(t, c.target)
				}
			}
		}
	}
}

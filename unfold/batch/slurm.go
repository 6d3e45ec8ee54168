package batch

import (
	"bufio"
	"bytes"
	"fmt"
	"strconv"
	"strings"
)

// DefaultMaxArraySize is Slurm's default MaxArraySize (array indices
// 0..1000), used when the configuration does not state it.
const DefaultMaxArraySize = 1001

// MaxArraySize reads MaxArraySize from the output of Slurm's
// configuration query ("MaxArraySize = 1001" among its lines); it
// returns DefaultMaxArraySize when the line is absent.
func MaxArraySize(config []byte) (int, error) {
	sc := bufio.NewScanner(bytes.NewReader(config))
	for sc.Scan() {
		k, v, ok := strings.Cut(sc.Text(), "=")
		if !ok || strings.TrimSpace(k) != "MaxArraySize" {
			continue
		}
		n, err := strconv.Atoi(strings.TrimSpace(v))
		if err != nil || n < 1 {
			return 0, fmt.Errorf("batch: MaxArraySize %q in the cluster's configuration is not a positive number", strings.TrimSpace(v))
		}
		return n, nil
	}
	return DefaultMaxArraySize, nil
}

// Array is one job array: task index i runs shard Offset + i, for i in
// Tasks (increasing, each below the cluster's MaxArraySize).
type Array struct {
	Offset int
	Tasks  []int
}

// Shards returns the shards of the array.
func (a *Array) Shards() []int {
	s := make([]int, len(a.Tasks))
	for i, t := range a.Tasks {
		s[i] = a.Offset + t
	}
	return s
}

// Spec returns the array's index list for Slurm ("0-99", "3,5,7-9"),
// with "%J" appended to run at most J tasks at once when maxParallel
// is above 0.
func (a *Array) Spec(maxParallel int) string {
	s := Ranges(a.Tasks)
	if maxParallel > 0 {
		s += "%" + strconv.Itoa(maxParallel)
	}
	return s
}

// Arrays splits the shards (increasing) into job arrays whose task
// indices are below maxArraySize: array c runs the shards from
// c·maxArraySize to (c+1)·maxArraySize − 1, with that offset.
func Arrays(shards []int, maxArraySize int) []Array {
	if maxArraySize < 1 {
		panic("batch: MaxArraySize below 1")
	}
	var out []Array
	for _, s := range shards {
		off := s / maxArraySize * maxArraySize
		if len(out) == 0 || out[len(out)-1].Offset != off {
			out = append(out, Array{Offset: off})
		}
		a := &out[len(out)-1]
		a.Tasks = append(a.Tasks, s-off)
	}
	return out
}

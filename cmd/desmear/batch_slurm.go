package main

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"github.com/desmear/desmear/unfold/batch"
)

// submitOptions are the options of "desmear batch submit".
type submitOptions struct {
	slurm       bool
	partition   string
	time        string
	mem         string
	maxParallel int
	missing     bool
	dryRun      bool
}

func newBatchSubmitCommand(g *globalOptions) *cobra.Command {
	var o submitOptions
	cmd := &cobra.Command{
		Use:   "submit DIR --slurm [--partition P --time T --mem M --max-parallel J] [--missing] [--dry-run]",
		Short: "Submit the shards of a plan as a Slurm job array, and the merge as a dependent job",
		Long: `submit writes sbatch scripts into DIR/slurm: a job array over the shards
(the array task index is the shard, plus an offset when the shards are more
than the cluster's MaxArraySize, read from "scontrol show config", and the
array is split), and a merge job that runs when every array task has
succeeded (afterok). It submits them with "sbatch --parsable" and prints the
job ids. --missing submits only the shards without a usable shard file;
--dry-run prints the scripts and the sbatch commands and submits nothing.`,
		Example: `  desmear batch submit toys --slurm --partition short --time 1:00:00 --max-parallel 50
  desmear batch submit toys --slurm --missing`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if !o.slurm {
				return usagef("batch submit needs --slurm (the only scheduler supported)")
			}
			if o.maxParallel < 0 {
				return usagef("--max-parallel %d: give 0 (no limit) or more", o.maxParallel)
			}
			return runSubmit(g, &o, args[0])
		},
	}
	f := cmd.Flags()
	f.BoolVar(&o.slurm, "slurm", false, "submit to Slurm")
	f.StringVar(&o.partition, "partition", "", "Slurm partition `P`")
	f.StringVar(&o.time, "time", "", "time limit `T` of each job (Slurm's syntax, e.g. 30:00)")
	f.StringVar(&o.mem, "mem", "", "memory `M` of each job (Slurm's syntax, e.g. 4G)")
	f.IntVar(&o.maxParallel, "max-parallel", 0, "run at most `J` shards at once (0: no limit)")
	f.BoolVar(&o.missing, "missing", false, "submit only the shards that are not done")
	f.BoolVar(&o.dryRun, "dry-run", false, "print the scripts and commands, submit nothing")
	return cmd
}

// shellQuote quotes s for a POSIX shell.
func shellQuote(s string) string { return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'" }

// header writes the #SBATCH lines shared by every job of a submission.
func (o *submitOptions) header(b *strings.Builder, name, log string) {
	fmt.Fprintf(b, "#!/bin/sh\n#SBATCH --job-name=%s\n#SBATCH --output=%s\n", name, log)
	for _, kv := range [][2]string{{"partition", o.partition}, {"time", o.time}, {"mem", o.mem}} {
		if kv[1] != "" {
			fmt.Fprintf(b, "#SBATCH --%s=%s\n", kv[0], kv[1])
		}
	}
}

// script is an sbatch script to write and submit.
type script struct {
	path, text string
	shards     []int // array scripts: the shards it runs
}

func runSubmit(g *globalOptions, o *submitOptions, dir string) error {
	abs, err := filepath.Abs(dir)
	if err != nil {
		return ioErr(err)
	}
	p, err := batch.Read(abs)
	if err != nil {
		return inputErr(err)
	}
	shards := make([]int, len(p.Shards))
	for s := range shards {
		shards[s] = s
	}
	if o.missing {
		pr, err := batch.Status(abs, p)
		if err != nil {
			return ioErr(err)
		}
		shards = pr.Todo()
	}
	maxArray := batch.DefaultMaxArraySize
	if out, err := exec.Command("scontrol", "show", "config").Output(); err == nil {
		if maxArray, err = batch.MaxArraySize(out); err != nil {
			return inputErr(err)
		}
	} else if !o.dryRun {
		return ioErr(fmt.Errorf("reading the cluster's MaxArraySize with \"scontrol show config\": %v (is Slurm installed and the cluster up?)", err))
	}
	exe, err := os.Executable()
	if err != nil {
		return ioErr(err)
	}
	sdir := filepath.Join(abs, "slurm")
	var scripts []script
	for c, a := range batch.Arrays(shards, maxArray) {
		var b strings.Builder
		o.header(&b, "desmear-shards", filepath.Join(sdir, "shard-%A_%a.log"))
		fmt.Fprintf(&b, "#SBATCH --array=%s\n", a.Spec(o.maxParallel))
		fmt.Fprintf(&b, "exec %s --no-progress batch run %s --shard \"$((%d + SLURM_ARRAY_TASK_ID))\"\n", shellQuote(exe), shellQuote(abs), a.Offset)
		scripts = append(scripts, script{path: filepath.Join(sdir, fmt.Sprintf("shards-%d.sbatch", c)), text: b.String(), shards: a.Shards()})
	}
	var b strings.Builder
	o.header(&b, "desmear-merge", filepath.Join(sdir, "merge-%j.log"))
	fmt.Fprintf(&b, "exec %s --no-progress batch merge %s\n", shellQuote(exe), shellQuote(abs))
	merge := script{path: filepath.Join(sdir, "merge.sbatch"), text: b.String()}

	if o.dryRun {
		w := g.stdout
		for _, s := range scripts {
			fmt.Fprintf(w, "# sbatch --parsable %s (shards %s)\n%s\n", s.path, batch.Ranges(s.shards), s.text)
		}
		dep := ""
		if len(scripts) > 0 {
			dep = "--dependency=afterok:ID... --kill-on-invalid-dep=yes "
		}
		fmt.Fprintf(w, "# sbatch --parsable %s%s\n%s", dep, merge.path, merge.text)
		return nil
	}
	if err := os.MkdirAll(sdir, 0o755); err != nil {
		return ioErr(err)
	}
	for _, s := range append(scripts, merge) {
		if err := os.WriteFile(s.path, []byte(s.text), 0o755); err != nil {
			return ioErr(err)
		}
	}
	var ids []string
	for _, s := range scripts {
		id, err := sbatch(s.path)
		if err != nil {
			return err
		}
		ids = append(ids, id)
		fmt.Fprintf(g.stdout, "shards %s: job %s\n", batch.Ranges(s.shards), id)
	}
	args := []string{}
	if len(ids) > 0 {
		args = append(args, "--dependency=afterok:"+strings.Join(ids, ":"), "--kill-on-invalid-dep=yes")
	}
	id, err := sbatch(append(args, merge.path)...)
	if err != nil {
		return err
	}
	fmt.Fprintf(g.stdout, "merge: job %s\n", id)
	return nil
}

// sbatch submits with "sbatch --parsable" and returns the job id.
func sbatch(args ...string) (string, error) {
	var stderr bytes.Buffer
	cmd := exec.Command("sbatch", append([]string{"--parsable"}, args...)...)
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		if errors.Is(err, exec.ErrNotFound) {
			return "", ioErr(fmt.Errorf("sbatch not found: is Slurm installed? (--dry-run prints the scripts)"))
		}
		return "", ioErr(fmt.Errorf("sbatch %s: %v: %s", strings.Join(args, " "), err, strings.TrimSpace(stderr.String())))
	}
	id, _, _ := strings.Cut(strings.TrimSpace(string(out)), ";")
	if _, err := strconv.Atoi(id); err != nil {
		return "", ioErr(fmt.Errorf("sbatch %s printed %q, not a job id", strings.Join(args, " "), out))
	}
	return id, nil
}

package pipeline

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/BurntSushi/toml"
)

const slurmUsage = `Usage: strata slurm STUDY.toml --tasks K [flags]

Runs a study on a Slurm cluster: a job array of K tasks samples the shards
(task i runs 'strata run SNAPSHOT --shard i/K --stages sample'), and a final
job, which starts only if every task succeeded, runs the whole study from the
cached samples and writes the outputs. The resolved study (with --set applied)
is stored as a snapshot under the output folder, with the job scripts and logs
in OUT/slurm/.

The cache directory must be on a file system that every node sees (it is
resolved to an absolute path). Array tasks write only to the cache. A
resubmission after a failure recomputes only the shards missing from the cache.

Flags:
`

type slurmFlags struct {
	studyFlags
	tasks                         int
	partition, timeLimit, account string
	sbatchArgs                    multi
	dryRun, wait                  bool
}

func (e *env) slurmCommand(args []string) int {
	fs := e.newFlagSet("slurm", slurmUsage)
	var f slurmFlags
	f.register(fs)
	fs.IntVar(&f.tasks, "tasks", 0, "number of array tasks K")
	fs.StringVar(&f.partition, "partition", "", "Slurm partition (left out when not given)")
	fs.StringVar(&f.timeLimit, "time", "", "time limit per job, e.g. 02:00:00 (left out when not given)")
	fs.StringVar(&f.account, "account", "", "Slurm account (left out when not given)")
	fs.Var(&f.sbatchArgs, "sbatch-arg", "extra #SBATCH option, e.g. --mem=2G (repeatable)")
	fs.BoolVar(&f.dryRun, "dry-run", false, "print the scripts without submitting")
	fs.BoolVar(&f.wait, "wait", false, "wait for both jobs; exit 1 naming any failed task and its log")
	pos, code, done := e.parse(fs, args)
	if done {
		return code
	}
	if f.tasks < 1 {
		fmt.Fprintln(e.stderr, "strata slurm: --tasks K ≥ 1 is required")
		return ExitUsage
	}
	st, code, ok := e.loadStudy("slurm", pos, &f.studyFlags)
	if !ok {
		return code
	}
	cacheAbs, err1 := filepath.Abs(f.cacheDir)
	outAbs, err2 := filepath.Abs(f.outDir)
	if err1 != nil || err2 != nil || !filepath.IsAbs(cacheAbs) {
		fmt.Fprintf(e.stderr, "strata slurm: cannot resolve %q to an absolute path\n", f.cacheDir)
		return ExitUsage
	}
	exe, err := os.Executable()
	if err == nil {
		exe, err = filepath.EvalSymlinks(exe)
	}
	if err != nil {
		fmt.Fprintf(e.stderr, "strata slurm: cannot find this program's path: %v\n", err)
		return ExitFail
	}
	dir := filepath.Join(outAbs, "slurm")
	logs := filepath.Join(dir, "logs")
	snapshot := filepath.Join(dir, "study.toml")
	var snap bytes.Buffer
	fmt.Fprintf(&snap, "# resolved from %s by strata slurm; do not edit\n", pos[0])
	if err := toml.NewEncoder(&snap).Encode(st); err != nil {
		fmt.Fprintf(e.stderr, "strata slurm: %v\n", err)
		return ExitFail
	}
	header := func(name, output string) string {
		var b strings.Builder
		b.WriteString("#!/bin/bash\n")
		fmt.Fprintf(&b, "#SBATCH --job-name=%s\n", name)
		fmt.Fprintf(&b, "#SBATCH --output=%s\n", output)
		if f.partition != "" {
			fmt.Fprintf(&b, "#SBATCH --partition=%s\n", f.partition)
		}
		if f.timeLimit != "" {
			fmt.Fprintf(&b, "#SBATCH --time=%s\n", f.timeLimit)
		}
		if f.account != "" {
			fmt.Fprintf(&b, "#SBATCH --account=%s\n", f.account)
		}
		for _, a := range f.sbatchArgs {
			fmt.Fprintf(&b, "#SBATCH %s\n", a)
		}
		return b.String()
	}
	q := shellQuote
	array := header("strata-"+st.Name+"-sample", filepath.Join(logs, "sample-%a.log")) +
		fmt.Sprintf("#SBATCH --array=0-%d\n", f.tasks-1) +
		fmt.Sprintf("exec %s run %s --shard \"${SLURM_ARRAY_TASK_ID}/%d\" --stages sample --cache %s --jobs \"${SLURM_CPUS_PER_TASK:-1}\"\n",
			q(exe), q(snapshot), f.tasks, q(cacheAbs))
	final := header("strata-"+st.Name, filepath.Join(logs, "final.log")) +
		fmt.Sprintf("exec %s run %s --cache %s --out %s --jobs \"${SLURM_CPUS_PER_TASK:-%d}\"\n",
			q(exe), q(snapshot), q(cacheAbs), q(outAbs), f.jobs)
	if f.dryRun {
		fmt.Fprintf(e.stdout, "# %s\n%s\n# %s (submitted with --dependency=afterok:<array job>)\n%s",
			filepath.Join(dir, "sample.sbatch"), array, filepath.Join(dir, "final.sbatch"), final)
		return ExitOK
	}
	if err := os.MkdirAll(logs, 0o777); err != nil {
		fmt.Fprintln(e.stderr, err)
		return ExitFail
	}
	for name, text := range map[string]string{"study.toml": snap.String(), "sample.sbatch": array, "final.sbatch": final} {
		if err := writeFileAtomic(filepath.Join(dir, name), []byte(text)); err != nil {
			fmt.Fprintln(e.stderr, err)
			return ExitFail
		}
	}
	arrayID, err := sbatch(filepath.Join(dir, "sample.sbatch"))
	if err != nil {
		fmt.Fprintf(e.stderr, "strata slurm: %v\n", err)
		return ExitFail
	}
	finalID, err := sbatch("--dependency=afterok:"+arrayID, filepath.Join(dir, "final.sbatch"))
	if err != nil {
		fmt.Fprintf(e.stderr, "strata slurm: %v\n", err)
		return ExitFail
	}
	fmt.Fprintf(e.stdout, "array job %s (%d tasks), final job %s; scripts and logs in %s\n", arrayID, f.tasks, finalID, dir)
	if !f.wait {
		return ExitOK
	}
	return e.waitSlurm(arrayID, finalID, logs)
}

func shellQuote(s string) string {
	if s != "" && !strings.ContainsAny(s, " \t\n'\"\\$`!*?[]{}()<>|&;#~") {
		return s
	}
	return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'"
}

func sbatch(args ...string) (string, error) {
	out, err := exec.Command("sbatch", append([]string{"--parsable"}, args...)...).CombinedOutput()
	if err != nil {
		return "", fmt.Errorf("sbatch %s: %v: %s", strings.Join(args, " "), err, strings.TrimSpace(string(out)))
	}
	id := strings.TrimSpace(string(out))
	if i := strings.IndexByte(id, ';'); i >= 0 {
		id = id[:i]
	}
	if _, err := strconv.Atoi(id); err != nil {
		return "", fmt.Errorf("sbatch answered %q", id)
	}
	return id, nil
}

// queued reports whether any job of id is still in the queue (not pending
// on a dependency that can never be met).
func queued(id string) (bool, error) {
	out, err := exec.Command("squeue", "-h", "-j", id, "-o", "%T %r").Output()
	if err != nil {
		// squeue errors for job IDs it has forgotten
		return false, nil
	}
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		if line == "" || strings.Contains(line, "DependencyNeverSatisfied") {
			continue
		}
		return true, nil
	}
	return false, nil
}

var (
	reState = regexp.MustCompile(`JobState=(\S+)`)
	reTask  = regexp.MustCompile(`ArrayTaskId=(\d+)`)
)

// jobStates returns the state of each array task (or of the job, key -1).
func jobStates(id string) (map[int]string, error) {
	out, err := exec.Command("scontrol", "-o", "show", "job", id).Output()
	if err != nil {
		return nil, fmt.Errorf("scontrol show job %s: %v", id, err)
	}
	states := map[int]string{}
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		m := reState.FindStringSubmatch(line)
		if m == nil {
			continue
		}
		task := -1
		if t := reTask.FindStringSubmatch(line); t != nil {
			task, _ = strconv.Atoi(t[1])
		}
		states[task] = m[1]
	}
	return states, nil
}

func (e *env) waitSlurm(arrayID, finalID, logs string) int {
	poll := func(id string) {
		for {
			if q, _ := queued(id); !q {
				return
			}
			time.Sleep(500 * time.Millisecond)
		}
	}
	poll(arrayID)
	states, err := jobStates(arrayID)
	if err != nil {
		fmt.Fprintf(e.stderr, "strata slurm: %v\n", err)
		return ExitFail
	}
	var tasks []int
	for t := range states {
		tasks = append(tasks, t)
	}
	sort.Ints(tasks)
	failed := 0
	for _, t := range tasks {
		if states[t] != "COMPLETED" {
			failed++
			fmt.Fprintf(e.stderr, "array task %d: %s; log %s\n", t, states[t], filepath.Join(logs, fmt.Sprintf("sample-%d.log", t)))
		}
	}
	if failed > 0 {
		exec.Command("scancel", finalID).Run()
		fmt.Fprintf(e.stderr, "strata slurm: %d array tasks failed; the final job %s was cancelled. Submit again to redo only the missing shards.\n", failed, finalID)
		return ExitFail
	}
	poll(finalID)
	fs, err := jobStates(finalID)
	if err != nil {
		fmt.Fprintf(e.stderr, "strata slurm: %v\n", err)
		return ExitFail
	}
	if fs[-1] != "COMPLETED" {
		fmt.Fprintf(e.stderr, "final job %s: %s; log %s\n", finalID, fs[-1], filepath.Join(logs, "final.log"))
		return ExitFail
	}
	fmt.Fprintf(e.stdout, "all %d array tasks and the final job completed\n", len(tasks))
	return ExitOK
}

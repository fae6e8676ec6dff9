package compare

import (
	"fmt"
	"strconv"
)

// CheckArrayTask checks array task i of n: 1 <= i <= n.
func CheckArrayTask(i, n int) error {
	if n < 1 || i < 1 || i > n {
		return fmt.Errorf("array task %d of %d: want 1 <= --array-task <= --array-task-count", i, n)
	}
	return nil
}

// Slurm's job-array environment variables.
const (
	EnvTaskID    = "SLURM_ARRAY_TASK_ID"
	EnvTaskMin   = "SLURM_ARRAY_TASK_MIN"
	EnvTaskCount = "SLURM_ARRAY_TASK_COUNT"
)

// ArrayTaskFromEnv reads the array task from Slurm's environment (getenv
// is os.Getenv in the command): i = SLURM_ARRAY_TASK_ID -
// SLURM_ARRAY_TASK_MIN + 1 and n = SLURM_ARRAY_TASK_COUNT. ok is false
// when SLURM_ARRAY_TASK_ID is not set. The error names the variable that
// is missing or not a number, or the task that is out of range.
func ArrayTaskFromEnv(getenv func(string) string) (i, n int, ok bool, err error) {
	if getenv(EnvTaskID) == "" {
		return 0, 0, false, nil
	}
	var v [3]int
	for k, name := range []string{EnvTaskID, EnvTaskMin, EnvTaskCount} {
		s := getenv(name)
		if s == "" {
			return 0, 0, true, fmt.Errorf("%s is set but %s is not: cannot tell which array task this is (give --array-task and --array-task-count)", EnvTaskID, name)
		}
		if v[k], err = strconv.Atoi(s); err != nil {
			return 0, 0, true, fmt.Errorf("%s=%q is not a whole number", name, s)
		}
	}
	i, n = v[0]-v[1]+1, v[2]
	if err := CheckArrayTask(i, n); err != nil {
		return 0, 0, true, fmt.Errorf("%s=%d, %s=%d, %s=%d: %w (stria expects a contiguous array such as --array=1-%d)", EnvTaskID, v[0], EnvTaskMin, v[1], EnvTaskCount, v[2], err, max(n, 1))
	}
	return i, n, true, nil
}

// Command stria fits and compares encoding models of a population's
// responses to a one-dimensional stimulus.
package main

import (
	"fmt"
	"os"
	"runtime/pprof"
)

func main() {
	// STRIA_CPUPROFILE=FILE writes a CPU profile of the whole run (for
	// finding where the time goes; see the README's speed section).
	if path := os.Getenv("STRIA_CPUPROFILE"); path != "" {
		if f, err := os.Create(path); err == nil {
			if pprof.StartCPUProfile(f) == nil {
				defer pprof.StopCPUProfile()
			}
		}
	}
	if err := newApp().Run(os.Args); err != nil {
		fmt.Fprintln(os.Stderr, "stria:", err)
		pprof.StopCPUProfile()
		os.Exit(1)
	}
}

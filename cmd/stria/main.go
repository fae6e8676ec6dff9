// Command stria fits and compares encoding models of a neural population's
// responses to a one-dimensional stimulus.
package main

import (
	"fmt"
	"os"
)

func main() {
	if err := newApp().Run(os.Args); err != nil {
		fmt.Fprintln(os.Stderr, "stria:", err)
		os.Exit(1)
	}
}

//go:build !(linux && (amd64 || arm64))

package main

import "fmt"

// evictFile is not available here: run with -stream-cold=false.
func evictFile(path string) error {
	return fmt.Errorf("-stream-cold needs Linux on amd64 or arm64; give -stream-cold=false")
}

package compare

import (
	"fmt"
	"runtime"
	"testing"
)

// TestSameNumbersAnyCores: the comparison of the numbers guard gives the
// digests of testdata/compare/expected.json on 1 and 3 cores too (gather
// runs its parts on all cores, each into its own place, and writes its
// tables by blocks of rows: nothing may depend on how many cores there
// are).
func TestSameNumbersAnyCores(t *testing.T) {
	if *updateNumbers {
		t.Skip("expected.json is being rewritten by TestSameNumbers")
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 3} {
		t.Run(fmt.Sprintf("%d cores", procs), func(t *testing.T) {
			runtime.GOMAXPROCS(procs)
			p := sameNumbersPlan(t)
			p.KeepResults = true
			checkSameNumbers(t, sameNumbersDigests(t, p))
		})
	}
}

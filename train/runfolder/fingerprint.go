package runfolder

import (
	"fmt"

	"github.com/strialab/stria/data/format"
)

// Fingerprint is what the numbers of one comparison unit depend on: the
// settings that matter to it (YAML, from settings.Config.NumericSettings with
// what cannot change the unit's numbers blanked) and the identity of the
// recording's files. A unit's result is reused only by a comparison whose
// fingerprint for it is the same.
type Fingerprint struct {
	Settings []byte
	Files    []format.FileID
}

// Mismatch lists how the fingerprint have (of a result on disk) differs
// from want (of the comparison run now), one line per difference: the
// settings as "key: old -> new" (diff gives those lines; see
// settings.DiffSettings), the files as "FILE: size ...; content differs". A
// file counts as the same when its size and content hash are (its path and
// modification time may differ: a copy or a touched file gives the same
// numbers); without hashes size and modification time decide. It returns
// nil when they match.
func (want Fingerprint) Mismatch(have Fingerprint, diff func(old, new []byte) ([]string, error)) []string {
	if have.Settings == nil && have.Files == nil {
		return []string{"the result has no fingerprint (it was written by an older stria)"}
	}
	var out []string
	if string(have.Settings) != string(want.Settings) {
		lines, err := diff(have.Settings, want.Settings)
		if err != nil || len(lines) == 0 {
			lines = []string{"settings differ"}
		}
		out = append(out, lines...)
	}
	return append(out, FilesMismatch(have.Files, want.Files)...)
}

// FilesMismatch lists how the data files have (recorded with a result)
// differ from want (used now), one line per file that differs, as in
// Fingerprint.Mismatch; nil when they match.
func FilesMismatch(have, want []format.FileID) []string {
	var out []string
	for i := range max(len(have), len(want)) {
		switch {
		case i >= len(have):
			out = append(out, fmt.Sprintf("data file %s: not used by the result", want[i].Path))
		case i >= len(want):
			out = append(out, fmt.Sprintf("data file %s: not used now", have[i].Path))
		default:
			a, b := have[i], want[i]
			if a.Hash != "" && b.Hash != "" && a.Size == b.Size && a.Hash == b.Hash {
				continue
			}
			if d := a.Diff(b); d != "" {
				out = append(out, fmt.Sprintf("data file %s: %s", b.Path, d))
			}
		}
	}
	return out
}

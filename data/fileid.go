package data

import (
	"fmt"
	"os"

	"github.com/strialab/stria/data/format"
)

// opened it.
type inputFile struct {
	id format.FileID
	st os.FileInfo
}

// statInputs records the distinct files of src (responses first) before
// they are read.
func statInputs(src Source) ([]inputFile, error) {
	stim := src.Stimulus
	if stim == "" {
		stim = src.Responses
	}
	paths := []string{src.Responses, stim}
	for _, p := range [][2]string{{src.Condition, src.ConditionColumn}, {src.Block, src.BlockColumn}} {
		if p[0] != "" {
			paths = append(paths, p[0])
		}
	}
	if src.Covariates != "" {
		paths = append(paths, src.Covariates)
	}
	var out []inputFile
	seen := map[string]bool{}
	for _, p := range paths {
		if seen[p] {
			continue
		}
		seen[p] = true
		st, err := os.Stat(p)
		if err != nil {
			return nil, fmt.Errorf("data: %w", err)
		}
		out = append(out, inputFile{id: format.StatID(p, st), st: st})
	}
	return out, nil
}

// Files returns the identities of the files the recording was loaded from,
// responses first, then the stimulus, condition, block and covariate files that are
// not the same path, as they were when Load opened them. The hashes are
// filled by HashFiles or by CheckWith with CheckOptions.Hash; before that
// they are empty. A recording not made by Load has no files.
func (r *Recording) Files() []format.FileID {
	out := make([]format.FileID, len(r.inputs))
	for i, f := range r.inputs {
		out[i] = f.id
	}
	return out
}

// HashFiles computes the content hash of every file the recording was
// loaded from (see format.FileID). A mapped responses file is hashed from its
// mapping, the others are read; both run over all cores. Files already
// hashed are skipped.
func (r *Recording) HashFiles() error {
	for i := range r.inputs {
		if err := r.hashInput(i, nil); err != nil {
			return err
		}
	}
	return nil
}

// hashInput hashes input i; mapped, when not nil, is the file's mapping.
func (r *Recording) hashInput(i int, mapped []byte) error {
	in := &r.inputs[i]
	if in.id.Hash != "" {
		return nil
	}
	if mapped == nil && i == 0 && r.Y != nil {
		if b, _, path, ok := format.MappedBytes(r.Y.Data); ok && path == in.id.Path {
			mapped = b
		}
	}
	if mapped != nil {
		if int64(len(mapped)) != in.id.Size {
			return format.ChangedError(in.id.Path, fmt.Sprintf("size %d -> %d bytes", in.id.Size, len(mapped)))
		}
		h, err := format.HashBytes(mapped)
		if err != nil {
			return err
		}
		in.id.Hash = h
		return nil
	}
	id, err := format.Identify(in.id.Path)
	if err != nil {
		return err
	}
	if d := in.id.Diff(format.FileID{Path: id.Path, Size: id.Size, ModTime: id.ModTime}); d != "" {
		return format.ChangedError(in.id.Path, d)
	}
	in.id.Hash = id.Hash
	return nil
}

// Unchanged checks that every file the recording was loaded from still has
// the size and modification time it had when Load opened it, and is still
// the same file (not replaced by another one under the same name). Call it
// at the end of a fit, before anything is written as final: a file
// modified while stria read it (a mapped .npy changes under the matrix)
// would make the results mix two versions of the data. The error names the
// file and says what changed, and wraps format.ErrChanged. A recording not made
// by Load (synth.Population, one built in memory) has no files and always passes.
func (r *Recording) Unchanged() error {
	for _, in := range r.inputs {
		st, err := os.Stat(in.id.Path)
		if err != nil {
			return fmt.Errorf("data: %s: %w (it was removed or renamed: %v); the results would not match any file on disk",
				in.id.Path, format.ErrChanged, err)
		}
		if !os.SameFile(in.st, st) {
			return fmt.Errorf("data: %s: %w (it was replaced by another file); the results would not match the file on disk: run again",
				in.id.Path, format.ErrChanged)
		}
		if d := in.id.Diff(format.StatID(in.id.Path, st)); d != "" {
			return format.ChangedError(in.id.Path, d)
		}
	}
	return nil
}

package train

import (
	"encoding/gob"
	"os"
	"path/filepath"
)

// The checkpoint tests send a Checkpoint through a gob file, as
// train/runfolder's resume_state.gob does (runfolder imports train, so
// train's tests cannot call it).

func SaveCheckpoint(dir string, c *Checkpoint) error {
	f, err := os.Create(filepath.Join(dir, "resume_state.gob"))
	if err != nil {
		return err
	}
	if err := gob.NewEncoder(f).Encode(c); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func LoadCheckpoint(dir string) (*Checkpoint, error) {
	f, err := os.Open(filepath.Join(dir, "resume_state.gob"))
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var c Checkpoint
	err = gob.NewDecoder(f).Decode(&c)
	return &c, err
}

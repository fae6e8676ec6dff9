package data

import "path/filepath"

const fixtureDir = "../testdata/data"

func fixture(name string) string { return filepath.Join(fixtureDir, name) }

package eval

import (
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// TestMethodsPage checks that the embedded methods page keeps the section
// numbers and check value labels that code and tests cite, and that every
// citation "eval/methods.md §N" in the module's Go files names a section
// that exists.
func TestMethodsPage(t *testing.T) {
	sections := map[string]bool{}
	for _, m := range regexp.MustCompile(`(?m)^## §(\d+) `).FindAllStringSubmatch(Methods, -1) {
		sections[m[1]] = true
	}
	for n := 0; n <= 15; n++ {
		if !sections[fmt.Sprint(n)] {
			t.Errorf("methods.md has no section §%d", n)
		}
	}
	for n := 1; n <= 14; n++ {
		if !strings.Contains(Methods, fmt.Sprintf("**E%d**", n)) {
			t.Errorf("methods.md has no check value E%d", n)
		}
	}
	cite := regexp.MustCompile(`eval/methods\.md §(\d+)`)
	err := filepath.WalkDir("..", func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && (d.Name() == ".git" || d.Name() == "testdata") {
			return filepath.SkipDir
		}
		if d.IsDir() || !strings.HasSuffix(path, ".go") {
			return nil
		}
		b, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		for _, m := range cite.FindAllStringSubmatch(string(b), -1) {
			if !sections[m[1]] {
				t.Errorf("%s cites eval/methods.md §%s, which does not exist", path, m[1])
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

package figure

import (
	"os"
)

// toFiles writes a rendered figure as base.svg and base.png, so that the
// tests read the figures back as a user's viewer would.
func toFiles(base string) func(*Image, error) error {
	return func(im *Image, err error) error {
		if err != nil {
			return err
		}
		if err := os.WriteFile(base+".svg", im.SVG, 0o644); err != nil {
			return err
		}
		return os.WriteFile(base+".png", im.PNG, 0o644)
	}
}

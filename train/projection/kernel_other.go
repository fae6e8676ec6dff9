//go:build !amd64

package projection

// Without the amd64 kernel mulInto is gonum's Dgemm.
const hasTile4x8 = false

func tile4x8(dst *float64, ldd int, x *float64, ldx int, a *float64, lda int, k int) {
	panic("projection: tile4x8 without its kernel")
}

func sq8(dst *float64, z *float64, ldz int, c *float64, k int) {
	panic("projection: sq8 without its kernel")
}

// setTile4x8 does nothing: there is no kernel to switch.
func setTile4x8(on bool) {}

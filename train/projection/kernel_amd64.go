package projection

import "golang.org/x/sys/cpu"

// tile4x8 is in kernel_amd64.s.
//
//go:noescape
func tile4x8(dst *float64, ldd int, x *float64, ldx int, a *float64, lda int, k int)

// sq8 is in kernel_amd64.s.
//
//go:noescape
func sq8(dst *float64, z *float64, ldz int, c *float64, k int)

// hasTile4x8 reports whether tile4x8 and sq8 may run (AVX2 and the operating
// system's support of its registers).
var hasTile4x8 = cpu.X86.HasAVX2

// setTile4x8 switches the kernel off and on, for tests.
func setTile4x8(on bool) { hasTile4x8 = on && cpu.X86.HasAVX2 }

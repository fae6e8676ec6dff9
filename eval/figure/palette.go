package figure

import "image/color"

// Palette is stria's series palette, in the order series use it. Hex values:
//
//	1 #1230D8 blue
//	2 #F9B41E amber
//	3 #9EACFF periwinkle
//	4 #514B00 olive
//	5 #963A6A plum
//	6 #309752 green
//
// The colours were chosen for this project by a search that maximised the
// smallest pairwise colour difference (in CAM02-UCS) under normal vision and
// under simulated protanopia, deuteranopia and tritanopia (Machado, Oliveira &
// Fernandes 2009, severity 1.0), while keeping each colour clearly darker than
// the white background. The order is greedy: every prefix keeps its worst
// pair as far apart as possible, so a figure with 2 or 3 series gets the most
// distinct colours. The smallest pairwise CAM02-UCS distance over all four
// vision types is about 58 for the first 2 colours, 35 for 3, 30 for 4 and
// 21.5 for all 6 (testdata/report/palette_cvd.json, from colorspacious 1.1.2).
// In CIELAB the smallest pairwise ΔE*ab is 47.6 (normal vision), 27.3
// (protanopia), 25.9 (deuteranopia) and 29.5 (tritanopia); the closest pair is
// olive/green for red-green deficiencies and periwinkle/green for tritanopia.
// Amber is the lightest colour (L* 77.8; 80.1 under deuteranopia), so lines
// are at least 1.2 pt wide. TestPaletteColourBlindSafe re-checks all of this
// with its own simulation.
var Palette = []color.RGBA{
	{R: 0x12, G: 0x30, B: 0xd8, A: 0xff},
	{R: 0xf9, G: 0xb4, B: 0x1e, A: 0xff},
	{R: 0x9e, G: 0xac, B: 0xff, A: 0xff},
	{R: 0x51, G: 0x4b, B: 0x00, A: 0xff},
	{R: 0x96, G: 0x3a, B: 0x6a, A: 0xff},
	{R: 0x30, G: 0x97, B: 0x52, A: 0xff},
}

// Ink is the colour of measured data and of text: near-black #222222.
var Ink = color.RGBA{R: 0x22, G: 0x22, B: 0x22, A: 0xff}

// Guide is the colour of reference lines such as the identity diagonal: #8C8C8C.
var Guide = color.RGBA{R: 0x8c, G: 0x8c, B: 0x8c, A: 0xff}

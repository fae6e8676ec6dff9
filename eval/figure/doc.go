// Package figure draws stria's figures from plain arrays with gonum.org/v1/plot.
//
// Conventions, stated once:
//
//   - Every figure is rendered twice, as SVG and as PNG, and returned as an Image
//     holding both files' bytes. The package never touches the file system: the
//     caller (train/export) writes the files and embeds the SVG in the report.
//   - Sizes are for print. Most figures are single-column, Width x Height =
//     3.5 x 2.6 in (252 x 187.2 pt); the scatter and the confusion heat map
//     (acuity.go) are 3.5 x 3.3 in so that their data area is close to square. The SVG carries width and height in pt and a
//     matching viewBox. The PNG is rendered at DPI = 300 dots per inch, so a
//     3.5 x 2.6 in figure is 1050 x 780 pixels.
//   - Text is Liberation Sans (bundled with gonum/plot, metric-compatible with
//     Arial and Helvetica, which the SVG names as fallbacks): axis labels 9 pt,
//     tick labels and legends 8 pt at print size.
//   - Axis labels carry units as "label (unit)". No titles are drawn: what a
//     figure shows belongs in its caption.
//   - Series colours come from Palette, in order; past its length the colours
//     repeat with a dash pattern (see SeriesStyle). Measured data (condition
//     means) are drawn in near-black, models in palette colours.
//   - NaN and ±Inf values are never plotted; where a function drops them it says
//     how many in the legend. Drawing the same figure twice gives byte-identical
//     SVG and PNG files.
//
// Inputs are computed arrays, so mismatched lengths are programmer errors and
// panic with a "figure: ..." message. Values (NaN, empty, constant) never panic.
// Errors returned are rendering errors.
package figure

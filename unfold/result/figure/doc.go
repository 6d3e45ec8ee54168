// Package figure draws the figures of a result report with
// gonum.org/v1/plot: charts of one or more panels sharing their x axis
// (points with error bars, step lines at bin edges, lines, reference
// lines, boundaries) and heat maps with a colour bar, as PNG or SVG. It
// knows nothing of results: the caller hands it the series to draw, so
// that what is drawn can be tested apart from how it is drawn.
//
// Colours are those of Okabe and Ito (Color Universal Design, 2008),
// distinguishable by colour-blind readers; each series also has its own
// marker and dash pattern, so that the figures read in grey scale. The
// heat maps use a blue-to-yellow map of monotone lightness (in the
// manner of cividis: Nuñez, Anderton, Renslow, PLoS ONE 13 (2018)
// e0199239), readable in grey scale and by colour-blind readers.
//
// The fonts are those embedded in gonum.org/v1/plot; no system font is
// read.
package figure

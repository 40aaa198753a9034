// Package report writes ferry's quality report: one self-contained HTML page
// that a user reads before tracing starts. It shows the leave-one-out check
// of the landmarks (every landmark's error against its predicted 95 %
// radius, the flags and their reasons), the leave-one-out error vectors in
// the orthogonal projections of the source volume, the predicted 95 %
// radius over the imaged field with the landmarks and mapped cells on it,
// the calibration of the predicted errors, the model comparison and, given
// the output of match, the cells whose match is ambiguous.
//
// The page fetches nothing: the figures are inline SVG drawn with
// gonum.org/v1/plot (vg/vgsvg), the style sheet is inline, it holds no
// script and names no font it does not expect on the reader's machine. It
// holds no clock time either: the same inputs give the same bytes, and the
// inputs' SHA-256 and the program version say what made it.
//
// Colours are those of the colour-blind-safe palette of Okabe & Ito (2008,
// "Color Universal Design (CUD): how to make figures and presentations that
// are friendly to colorblind people", J*Fly); every colour comes with a
// marker shape of its own, so that nothing depends on telling colours
// apart. docs/report.md lists which role gets which colour.
//
// New builds a Page from an Input; Page.WriteTo writes the HTML. The tables
// of `ferry map` and `ferry match` are read by the readers beside their
// writers, register.ReadMappedTable and match.ReadMatchesTable.
package report

// Package modeldoc reads and writes the mixd model document: the versioned
// JSON format in which mixd stores, exports and imports one version of a
// fitted mixture model. The format is specified in FORMAT.md beside this file.
//
// Encode and Decode apply the same validation, so every document Encode
// writes is one Decode accepts, and Decode never returns a model that the
// model mathematics (package fitters/mixture) would refuse. Floating-point
// values round-trip bit for bit: they are written in the shortest decimal
// form that parses back to the same float64.
//
// Error messages name the offending field by its path in the document, for
// example `components[1].covariance: row 0 has 3 values, want 2`.
package modeldoc

// Format is the value of the document's "format" field.
const Format = "mixd-model"

// FormatVersion is the newest value of the document's "format_version"
// field that this build reads, and the one it writes.
const FormatVersion = 1

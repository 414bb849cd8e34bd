// Package classes turns a classifier's raw scores into what a person reads:
// probabilities (softmax, or the scores as they are when they already form a
// distribution), the top-k predictions with their names, and the class names
// themselves, found in the model's metadata, in a labels file beside the
// model or in a file the user chose.
//
// It runs nothing and imports no runtime: the drawing package and the
// analyses both use it.
//
// # Security Considerations
//
// Labels files are untrusted input: ReadLabels refuses files over 16 MiB and
// anything that is not UTF-8 text before keeping any of it.
package classes

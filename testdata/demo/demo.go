// Package demo embeds lanthorn's demo scenario: a wind-turbine vendor scores
// gearbox failure risk on vibration features that a wind-farm operator sends
// encrypted. It holds the model spec, its trained weights and a few
// standardised feature vectors, so that the lanthorn command can build and
// run the demo with no files on disk. The data is synthetic; train/main.go
// regenerates the weights and the sample input.
package demo

import "embed"

// Files holds gearbox.yaml, the weights/*.npy files it references and
// input.csv, the sample feature vectors (one a line, comma-separated, already
// standardised and clipped to [-4, 4]), at the paths the spec uses.
//
//go:embed gearbox.yaml weights input.csv
var Files embed.FS

// Spec is the path of the model spec inside Files.
const Spec = "gearbox.yaml"

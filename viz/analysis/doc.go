// Package analysis holds the analyses that drive a model: they run an ONNX
// Runtime session (package fovea/modelio/infer) over one image or a folder of
// images and return plain data for the window, the command line and tests to
// draw or print.
//
//   - Occlude: occlusion sensitivity of one image, several target classes in
//     one pass; the result is a viz.Occlusion that viz.RenderOcclusion draws.
//   - Scan: the dead-filter scan over a folder of probe images (firing
//     rates, maxima, means and flags per channel of every ReLU-like layer),
//     with its CSV and JSON forms and the session settings it runs best with
//     (ScanSession).
//   - Evaluate: a model over labelled images (a folder with one sub-folder
//     per class, or a list file: ReadFolder, ReadList) with accuracy, its
//     Wilson interval, per-class precision and recall, the confusion matrix,
//     the mistakes and the least sure right answers; shards of the sorted
//     entries (Labelled.Shard) merge exactly (Merge), as scans do
//     (ScanPart, MergeScan).
//   - Comparing two models (compare.go, compare_run.go): layer tables
//     aligned (AlignLayers), kernels compared filter by filter by cosine
//     similarity and norm ratio (CompareFilters, paired by index or greedily
//     by similarity), two scans compared (CompareHealth: newly dead,
//     revived), paired answers with McNemar's exact test
//     (ComparePredictions, McNemarExact).
//
// The package sits above the drawing package in the dependency order: it may
// use viz's data types, and viz never imports it, so drawing needs no model
// runtime. Dataset-level analyses (evaluating a labelled folder, what drives
// each filter, comparing checkpoints) belong here too.
//
// # Security Considerations
//
// Probe folders and images are untrusted input: images go through
// prep.Load, which checks sizes before decoding; a file that cannot be read
// either stops the scan with its name or, with ScanOptions.SkipUnreadable,
// is recorded and passed over. Memory stays bounded by the batch size, not
// the number of images.
package analysis

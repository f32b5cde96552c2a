// Package dataset moves images into a project and labelled datasets out of
// it: the import pipeline (decode, check, store by SHA-256, thumbnail,
// perceptual hash), near-duplicate clustering, stable group-aware split
// assignment, and the release writer (folder or .tar.gz stream). The CLI and
// the web upload call the same code here. It uses store and store/blob, and
// must not import web or cmd.
package dataset

// Package fileio writes files atomically for the packages of this library
// that save state (SF tables, discriminators, MDP files).
//
// A write goes to a temporary file in the directory of the destination,
// which is then given its permission bits, synced to stable storage, closed
// and renamed over the destination; the directory is synced afterwards where
// the platform allows it, so the rename itself survives a crash. Readers
// therefore see either the old file or the complete new one, never a partial
// file, and a failed write leaves an existing file untouched and no
// temporary file behind.
//
// The temporary file is named "." + base + ".tmp" + a random suffix, so it
// is hidden on Unix and cannot collide with the destination or with a
// concurrent writer of the same path.
package fileio

// Package fileio holds the file plumbing shared by the packages of this
// library that save state (SF tables, universal SFs, discriminators,
// networks, MDP files, checkpoints): atomic writes and one binary framing.
//
// # Atomic writes
//
// A write goes to a temporary file in the directory of the destination,
// which is then given its permission bits, synced to stable storage, closed
// and renamed over the destination; the directory is synced afterwards where
// the platform allows it, so the rename itself survives a crash. Readers
// therefore see either the old file or the complete new one, never a partial
// file, and a failed write leaves an existing file untouched and no
// temporary file behind.
//
// The temporary file is named "." + base + ".tmp" + a random suffix of
// decimal digits, so it is hidden on Unix and cannot collide with the
// destination or with a concurrent writer of the same path. Saved files
// get FileMode (0644). A process killed in the middle of a write (kill -9,
// a machine stopped) leaves its temporary file behind; RemoveTemps
// removes such files, and only those (TempDest recognises the names).
//
// # Framing
//
// Every binary record the library writes, a file or a blob embedded in a
// larger record, has the same frame, all integers little-endian:
//
//	offset  size  content
//	0       4     magic: four ASCII bytes naming the kind of record
//	4       4     format version of that kind, uint32
//	8       8     payload length n in bytes, uint64, at most MaxPayload
//	16      n     payload
//	16+n    4     CRC-32C (Castagnoli polynomial) of bytes [0, 16+n)
//
// Inside the payload, integers are two's complement int64 (8 bytes),
// float64s their IEEE-754 bits (8 bytes, so every value round-trips bit for
// bit, NaN payloads and signed zeros included), flags one byte (0 or 1),
// and variable-length data is preceded by its element count. Each kind
// documents its payload where it is defined.
//
// An Encoder appends the fields into a buffer allocated once at its final
// size (when the caller knows it) and Seal writes the header in place and
// appends the checksum. Open checks a record before anything is decoded:
// length, magic, version, the payload length against the bytes actually
// present, and the checksum. A Decoder then checks the bytes left before
// every read and allocates no slice larger than the bytes left can hold,
// so no header, however large the sizes it claims, makes a loader allocate
// more than the data it was given (itself at most MaxPayload plus the
// frame, which ReadFile enforces before reading a file). Every failure is
// an error wrapping errs.Corrupt that names the record and the field.
package fileio

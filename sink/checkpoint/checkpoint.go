// Package checkpoint frames and stores the saved state of lariat's models:
// one opaque payload per model (the model's whole pipeline value), written
// with a small header that carries a format version, the arithmetic the
// state was computed with, the time it was written and checksums, so that a
// corrupt, truncated or foreign file is detected instead of restored.
//
// Storage is behind the Store interface. Dir keeps the newest two
// checkpoints of each model in a local directory, replaced atomically
// (temporary file, fsync, rename, fsync of the directory); a shared store
// (a JetStream object store or key-value bucket) can implement the same
// interface with the same frames.
//
// Encode and Decode are pure functions. A Dir is safe for concurrent use by
// different models; calls for one model must not overlap.
package checkpoint

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"time"
)

// Format is the version of the frame layout written by Encode.
const Format = 1

// magic starts every checkpoint file.
var magic = [8]byte{'L', 'A', 'R', 'I', 'A', 'T', 'C', 'P'}

// headerLen is the size of the frame header: magic (8), format (2),
// arithmetic (1), reserved (1), payload length (8), written Unix ns (8),
// payload CRC-32C (4), header CRC-32C (4).
const headerLen = 36

// castagnoli is CRC-32C (Castagnoli 1993), the checksum of both parts.
var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// Errors of Decode; the error Decode returns wraps one of them.
var (
	// ErrForeign is a file that is not a lariat checkpoint.
	ErrForeign = errors.New("checkpoint: not a lariat checkpoint")
	// ErrTruncated is a checkpoint shorter than its header says.
	ErrTruncated = errors.New("checkpoint: truncated")
	// ErrCorrupt is a checkpoint whose checksum does not match.
	ErrCorrupt = errors.New("checkpoint: corrupt")
	// ErrVersion is a checkpoint of a frame format this build cannot read.
	ErrVersion = errors.New("checkpoint: unknown format version")
	// ErrNotFound means no checkpoint of the model exists.
	ErrNotFound = errors.New("checkpoint: none saved")
)

// Arithmetic names the floating-point path a state was computed with. The
// same records give bit-identical states only on the same path.
type Arithmetic uint8

// The arithmetic paths.
const (
	// Portable is the pure-Go path (other architectures, -tags purego).
	Portable Arithmetic = 1
	// AVX2 is the amd64 assembly path (AVX2 and FMA).
	AVX2 Arithmetic = 2
)

// String returns "portable" or "avx2".
func (a Arithmetic) String() string {
	switch a {
	case Portable:
		return "portable"
	case AVX2:
		return "avx2"
	}
	return fmt.Sprintf("arithmetic(%d)", uint8(a))
}

// Meta describes a checkpoint.
type Meta struct {
	// Format is the frame format version.
	Format uint16
	// Arithmetic is the path the state was computed with.
	Arithmetic Arithmetic
	// Written is when the checkpoint was encoded.
	Written time.Time
}

// Encode frames payload with a header for m (m.Format is ignored: Encode
// writes Format).
func Encode(payload []byte, m Meta) []byte {
	b := make([]byte, headerLen, headerLen+len(payload))
	copy(b, magic[:])
	binary.BigEndian.PutUint16(b[8:], Format)
	b[10] = byte(m.Arithmetic)
	binary.BigEndian.PutUint64(b[12:], uint64(len(payload)))
	binary.BigEndian.PutUint64(b[20:], uint64(m.Written.UnixNano()))
	binary.BigEndian.PutUint32(b[28:], crc32.Checksum(payload, castagnoli))
	binary.BigEndian.PutUint32(b[32:], crc32.Checksum(b[:32], castagnoli))
	return append(b, payload...)
}

// Decode checks a frame and returns its payload (a sub-slice of b) and
// header. The error wraps ErrForeign, ErrTruncated, ErrCorrupt or
// ErrVersion and says what was found.
func Decode(b []byte) ([]byte, Meta, error) {
	var m Meta
	switch {
	case len(b) == 0:
		return nil, m, fmt.Errorf("%w: empty file", ErrTruncated)
	case len(b) < len(magic) && bytes.HasPrefix(magic[:], b):
		return nil, m, fmt.Errorf("%w: %d bytes, shorter than the header", ErrTruncated, len(b))
	case !bytes.HasPrefix(b, magic[:]):
		return nil, m, fmt.Errorf("%w: starts with %q", ErrForeign, b[:min(len(b), len(magic))])
	case len(b) < headerLen:
		return nil, m, fmt.Errorf("%w: %d bytes, shorter than the %d-byte header", ErrTruncated, len(b), headerLen)
	}
	if got, want := crc32.Checksum(b[:32], castagnoli), binary.BigEndian.Uint32(b[32:]); got != want {
		return nil, m, fmt.Errorf("%w: header checksum %08x, want %08x", ErrCorrupt, got, want)
	}
	m.Format = binary.BigEndian.Uint16(b[8:])
	if m.Format != Format {
		return nil, m, fmt.Errorf("%w: %d (this build reads %d)", ErrVersion, m.Format, Format)
	}
	m.Arithmetic = Arithmetic(b[10])
	n := binary.BigEndian.Uint64(b[12:])
	m.Written = time.Unix(0, int64(binary.BigEndian.Uint64(b[20:]))).UTC()
	body := b[headerLen:]
	if uint64(len(body)) < n {
		return nil, m, fmt.Errorf("%w: %d of %d payload bytes", ErrTruncated, len(body), n)
	}
	if uint64(len(body)) > n {
		return nil, m, fmt.Errorf("%w: %d bytes after a %d-byte payload", ErrCorrupt, uint64(len(body))-n, n)
	}
	if got, want := crc32.Checksum(body, castagnoli), binary.BigEndian.Uint32(b[28:]); got != want {
		return nil, m, fmt.Errorf("%w: payload checksum %08x, want %08x", ErrCorrupt, got, want)
	}
	return body, m, nil
}

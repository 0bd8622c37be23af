package window

// DefaultHoldoutEvery is the holdout period k that Splitter uses when
// Every is 0.
const DefaultHoldoutEvery = 5

// Splitter decides, deterministically, whether a record is held out (sent
// to the held-out set, never to training). One record in Every is held out.
// The zero value holds out every 5th record by sequence number.
type Splitter struct {
	// Every is the period k: one record in k is held out. 0 means 5;
	// any other value < 2 (1 or negative) disables the holdout.
	Every int
	// ByKey hashes the record key (FNV-1a, 64 bit) instead of using the
	// sequence number, so all records of one key fall on the same side.
	// A record with an empty key falls back to its sequence number.
	ByKey bool
}

// Period returns the effective k: Every, or 5 when Every is 0, or 0 when
// the holdout is disabled (Every < 2 and not 0).
func (s Splitter) Period() int {
	switch {
	case s.Every == 0:
		return DefaultHoldoutEvery
	case s.Every < 2:
		return 0
	}
	return s.Every
}

// Holdout reports whether the record with sequence number seq and key is
// held out: FNV-1a-64(key) % k == 0 when ByKey and key is not empty, else
// seq % k == k−1 (so with k = 5 the 5th, 10th, ... records of a stream
// numbered from 0 are held out). It does not allocate.
func (s Splitter) Holdout(seq uint64, key []byte) bool {
	k := uint64(s.Period())
	if k == 0 {
		return false
	}
	if s.ByKey && len(key) > 0 {
		return fnv1a64(key)%k == 0
	}
	return seq%k == k-1
}

// fnv1a64 is the 64-bit FNV-1a hash (the same as hash/fnv.New64a), inlined
// to avoid allocating a hash.Hash64 per record.
func fnv1a64(b []byte) uint64 {
	const (
		offset = 14695981039346656037
		prime  = 1099511628211
	)
	h := uint64(offset)
	for _, c := range b {
		h ^= uint64(c)
		h *= prime
	}
	return h
}

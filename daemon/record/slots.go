package record

// Slots that age out. A learned name that no decoded record has carried
// for DecoderOptions.FreeAfter decodes gives its slot back (free), and a
// new name takes the lowest free slot before the feature set grows; while
// the cap is reached and no slot is free a new name is dropped. The names
// array is copied before a slot it holds changes hands whenever a Names
// slice shares it, so a slice already returned never changes.

// scanEvery is the number of decodes between two scans for names to free.
const scanEvery = 64

// commit ends a successful Decode: it counts the record and the names it
// dropped, and every scanEvery records frees the slots whose names aged
// out.
func (d *Decoder) commit() {
	d.count++
	if d.drops > 0 {
		d.dropped += d.drops
		if len(d.over) > 64 {
			d.over = nil // do not keep a large map for a hostile record
		}
		clear(d.over)
	}
	if d.freeAfter > 0 && d.count%scanEvery == 0 {
		d.age()
	}
}

// age frees every learned slot whose name has not been carried for
// freeAfter decodes.
func (d *Decoder) age() {
	for j := d.fixed; j < len(d.names); j++ {
		if d.names[j] != "" && d.count-d.last[j] >= d.freeAfter {
			d.own()
			delete(d.index, d.names[j])
			d.names[j], d.plain[j] = "", false
			d.nfree++
			d.freed++
		}
	}
}

// own makes the names array the decoder's own before an element of it
// changes: a copy if a returned Names slice shares it.
func (d *Decoder) own() {
	if !d.shared {
		return
	}
	d.names = append(make([]string, 0, cap(d.names)), d.names...)
	d.shared = false
}

// reuse gives the lowest free slot to a new name (valid, learned by the
// record being decoded) and returns the slot.
func (d *Decoder) reuse(name []byte) int {
	j := d.fixed
	for d.names[j] != "" {
		j++
	}
	d.own()
	n := string(name)
	d.names[j], d.plain[j] = n, isPlain(n)
	d.index[n] = j
	d.seen[j], d.last[j] = d.gen, d.count+1
	d.nfree--
	d.reused = append(d.reused, j)
	d.guess = j + 1
	return j
}

// Dropped returns the number of channel values dropped because their new
// name found the feature cap reached and no slot free (records decoded
// successfully only; see DecoderOptions.MaxFeatures).
func (d *Decoder) Dropped() uint64 { return d.dropped }

// Freed returns the number of slots given back by names that aged out
// (DecoderOptions.FreeAfter).
func (d *Decoder) Freed() uint64 { return d.freed }

// Free returns the number of free slots.
func (d *Decoder) Free() int { return d.nfree }

package checkpoint

import (
	"bytes"
	"errors"
	"hash/crc32"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

// TestDecodeRefuses runs every damaged frame through Decode: each is
// refused with the error class that names what is wrong, never returned as
// a payload. Source: the frame layout of checkpoint.go; CRC-32C detects
// every burst error up to 32 bits (Castagnoli, Bräuer & Herrmann 1993,
// value from memory), so each single-byte change below must be caught.
func TestDecodeRefuses(t *testing.T) {
	good := Encode([]byte("the model's state"), Meta{Arithmetic: AVX2, Written: time.Unix(1e9, 0)})
	flip := func(i int) []byte {
		b := bytes.Clone(good)
		b[i] ^= 0x40
		return b
	}
	version := bytes.Clone(good)
	version[9] = 9
	cases := []struct {
		name string
		b    []byte
		want error
	}{
		{"zero length", nil, ErrTruncated},
		{"part of the magic", good[:5], ErrTruncated},
		{"header cut", good[:20], ErrTruncated},
		{"payload cut", good[:len(good)-3], ErrTruncated},
		{"trailing bytes", append(bytes.Clone(good), 'x'), ErrCorrupt},
		{"foreign file", []byte("models:\n  - name: pump\n"), ErrForeign},
		{"foreign binary", []byte{0x89, 'P', 'N', 'G', 0, 0, 0, 0, 0, 0}, ErrForeign},
		{"payload byte flipped", flip(len(good) - 1), ErrCorrupt},
		{"length flipped", flip(15), ErrCorrupt},
		{"arithmetic flipped", flip(10), ErrCorrupt},
		{"header checksum flipped", flip(33), ErrCorrupt},
		{"future format", version, ErrCorrupt}, // the header checksum covers the version
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			p, _, err := Decode(tc.b)
			if !errors.Is(err, tc.want) || p != nil {
				t.Errorf("Decode: payload %q, error %v; want %v", p, err, tc.want)
			}
		})
	}
	p, m, err := Decode(good)
	if err != nil || string(p) != "the model's state" || m.Arithmetic != AVX2 || m.Format != Format || !m.Written.Equal(time.Unix(1e9, 0)) {
		t.Errorf("good frame: %q %+v %v", p, m, err)
	}
}

// TestDecodeVersion: a frame of another format version with a valid
// header checksum is refused as such.
func TestDecodeVersion(t *testing.T) {
	b := Encode([]byte("x"), Meta{})
	b[9] = 2                     // format 2
	copy(b[32:36], crcHeader(b)) // a valid header checksum for it
	if _, _, err := Decode(b); !errors.Is(err, ErrVersion) {
		t.Errorf("format 2: %v, want ErrVersion", err)
	}
}

// TestDirFallback saves two checkpoints, damages the newest in each way a
// crash or a disk can, and checks that Load falls back to the previous
// one and names the damaged file and the reason.
func TestDirFallback(t *testing.T) {
	damage := map[string]func(path string) error{
		"zero length": func(p string) error { return os.WriteFile(p, nil, 0o600) },
		"truncated": func(p string) error {
			b, _ := os.ReadFile(p)
			return os.WriteFile(p, b[:len(b)/2], 0o600)
		},
		"corrupt": func(p string) error {
			b, _ := os.ReadFile(p)
			b[len(b)-1] ^= 1
			return os.WriteFile(p, b, 0o600)
		},
		"foreign":   func(p string) error { return os.WriteFile(p, []byte("{\"not\": \"ours\"}"), 0o600) },
		"removed":   os.Remove,
		"directory": func(p string) error { os.Remove(p); return os.Mkdir(p, 0o700) },
	}
	for name, hurt := range damage {
		t.Run(name, func(t *testing.T) {
			d, err := NewDir(filepath.Join(t.TempDir(), "ckpt"))
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range []string{"first", "second"} {
				if err := d.Save("pump-trip", Encode([]byte(s), Meta{Arithmetic: Portable})); err != nil {
					t.Fatal(err)
				}
			}
			p, _, skipped, err := d.Load("pump-trip")
			if err != nil || string(p) != "second" || len(skipped) != 0 {
				t.Fatalf("before the damage: %q %v %v", p, skipped, err)
			}
			if err := hurt(filepath.Join(d.Path(), "pump-trip.ckpt")); err != nil {
				t.Fatal(err)
			}
			p, m, skipped, err := d.Load("pump-trip")
			if err != nil || string(p) != "first" || m.Arithmetic != Portable {
				t.Fatalf("after the damage: %q %v, want the previous checkpoint", p, err)
			}
			if name != "removed" && (len(skipped) != 1 || !strings.Contains(skipped[0].Error(), "pump-trip.ckpt")) {
				t.Errorf("skipped %v, want one error naming pump-trip.ckpt", skipped)
			}
			entries, _ := os.ReadDir(d.Path())
			for _, e := range entries {
				if strings.HasSuffix(e.Name(), ".tmp") {
					t.Errorf("temporary file left: %s", e.Name())
				}
			}
		})
	}
}

// TestDirNone: no checkpoint is ErrNotFound; two bad ones are an error
// naming both; a name that cannot be a file name is refused.
func TestDirNone(t *testing.T) {
	d, err := NewDir(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	if _, _, _, err := d.Load("flow"); !errors.Is(err, ErrNotFound) {
		t.Errorf("no checkpoint: %v, want ErrNotFound", err)
	}
	os.WriteFile(filepath.Join(d.Path(), "flow.ckpt"), []byte("junk"), 0o600)
	os.WriteFile(filepath.Join(d.Path(), "flow.prev.ckpt"), nil, 0o600)
	_, _, skipped, err := d.Load("flow")
	if err == nil || errors.Is(err, ErrNotFound) || len(skipped) != 2 {
		t.Errorf("two bad checkpoints: %v (skipped %v)", err, skipped)
	}
	for _, bad := range []string{"", "../etc/passwd", "a/b", ".hidden"} {
		if err := d.Save(bad, Encode(nil, Meta{})); err == nil {
			t.Errorf("Save(%q) accepted", bad)
		}
	}
}

// TestDirRemovesTemporary: a process killed while it wrote a checkpoint
// leaves Save's temporary file; the next NewDir removes it and nothing
// else.
func TestDirRemovesTemporary(t *testing.T) {
	dir := t.TempDir()
	d, err := NewDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if err := d.Save("pump-trip", Encode([]byte("kept"), Meta{})); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{".pump-trip.1967595753.tmp", "notes.tmp", ".pump-trip.x.tmp"} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte("half"), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	if d, err = NewDir(dir); err != nil {
		t.Fatal(err)
	}
	var names []string
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		names = append(names, e.Name())
	}
	if want := []string{".pump-trip.x.tmp", "notes.tmp", "pump-trip.ckpt"}; !slices.Equal(names, want) {
		t.Errorf("files %v, want %v", names, want)
	}
	if p, _, _, err := d.Load("pump-trip"); err != nil || string(p) != "kept" {
		t.Errorf("Load: %q %v", p, err)
	}
}

// crcHeader returns the big-endian CRC-32C of a frame's first 32 bytes.
func crcHeader(b []byte) []byte {
	s := crc32.Checksum(b[:32], crc32.MakeTable(crc32.Castagnoli))
	return []byte{byte(s >> 24), byte(s >> 16), byte(s >> 8), byte(s)}
}

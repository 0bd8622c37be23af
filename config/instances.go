package config

import (
	"fmt"
	"strings"
	"time"
)

// maxInstances bounds instances.max.
const maxInstances = 1_000_000

// validateInstances checks a template entry: the key token is a "*" of the
// subject, the cap and idle time are in range, and nothing the daemon does
// not offer for templates is asked for.
func (m *Model) validateInstances(k *checker, p string) {
	in := m.Instances
	if in.KeyToken < 0 {
		k.add(p+".instances.key_token", "%d is negative (allowed: 0 = one model, or the 1-based position of a * token of subject)", in.KeyToken)
		return
	}
	if in.KeyToken == 0 {
		return
	}
	toks := strings.Split(m.Subject, ".")
	if in.KeyToken > len(toks) || toks[in.KeyToken-1] != "*" {
		k.add(p+".instances.key_token", "%d is not a * token of subject %q (allowed: the 1-based position of a * token)", in.KeyToken, m.Subject)
	}
	k.intRange(p+".instances.max", in.Max, 1, maxInstances)
	if in.Idle < 0 {
		k.add(p+".instances.idle", "%v is negative (allowed: >= 0s, 0 = never unload)", in.Idle)
	}
	if m.ScoreSubject != "" {
		k.add(p+".score_subject", "is not offered for a template (instances.key_token > 0)")
	}
	k.intRange(p+".instances.partitions", in.Partitions, 1, maxPartitions)
	if in.Takeover < Duration(time.Second) || in.Takeover > Duration(5*time.Minute) {
		k.add(p+".instances.takeover", "%v is out of range (allowed: 1s..5m)", in.Takeover)
	}
}

// maxPartitions bounds instances.partitions.
const maxPartitions = 1024

// validateShared checks what shared partitions need from the rest of the
// file: checkpoints every process can read, and a stream to read from.
func (c *Config) validateShared(k *checker) {
	for i := range c.Models {
		m := &c.Models[i]
		if !m.Template() || m.Instances.Partitions <= 1 {
			continue
		}
		p := fmt.Sprintf("models[%d].instances.partitions", i)
		if c.Checkpoint.Store != CheckpointBucket {
			k.add(p, "%d partitions are shared among lariat processes and need checkpoint.store: bucket (is %q), so that a process can take over another's partitions", m.Instances.Partitions, c.Checkpoint.Store)
		}
		if c.Intake.Mode == IntakeCore {
			k.add(p, "%d partitions are read from a JetStream stream and need intake.mode auto or durable (is core)", m.Instances.Partitions)
		}
	}
}

// KeyWildcard returns the 1-based position of the template's key token
// among the "*" tokens of Subject (the argument of the server's
// partition() mapping function), or 0 for a model that is not a template.
func (m *Model) KeyWildcard() int {
	if !m.Template() {
		return 0
	}
	n := 0
	for i, tok := range strings.Split(m.Subject, ".") {
		if tok == "*" {
			n++
		}
		if i+1 == m.Instances.KeyToken {
			return n
		}
	}
	return 0
}

// InstanceKey returns the instance key of subject for a template whose key
// is token keyToken (1-based), or "" when subject has no such token.
func InstanceKey(subject string, keyToken int) string {
	for i := 1; ; i++ {
		j := strings.IndexByte(subject, '.')
		if i == keyToken {
			if j < 0 {
				return subject
			}
			return subject[:j]
		}
		if j < 0 {
			return ""
		}
		subject = subject[j+1:]
	}
}

// ValidKey reports whether key may name an instance: 1 to 64 bytes of
// [A-Za-z0-9_-], starting with a letter or digit, so that <name>.<key> is
// a subject's tokens, an HTTP path segment, a metric label and a file name.
func ValidKey(key string) bool {
	if key == "" || len(key) > maxNameLen {
		return false
	}
	for i := 0; i < len(key); i++ {
		c := key[i]
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9':
		case (c == '_' || c == '-') && i > 0:
		default:
			return false
		}
	}
	return true
}

package config

import (
	"fmt"
	"math"
	"regexp"
	"strings"
	"time"
	"unicode"
)

// Limits enforced by validation.
const (
	maxNameLen     = 64
	maxRecords     = 10_000_000
	maxFeatureCap  = 100_000
	maxQueue       = 1 << 20
	maxIdleSteps   = 1 << 20
	maxSteps       = 64
	maxLadder      = 100
	minWindow      = 10
	minHoldout     = 10
	minPendingByte = 1 << 20
	minBody        = 1 << 10
	maxBody        = 1 << 30
	maxFeatureName = 256
)

var (
	nameRE = regexp.MustCompile(`^[a-z0-9][a-z0-9_-]*$`)
	envRE  = regexp.MustCompile(`^[A-Za-z_][A-Za-z0-9_]*$`)
)

// Validate checks every field of c against the rules of the schema, without
// any I/O, and returns [Errors] listing every problem, or nil. Call it again
// after changing a Config in code.
func (c *Config) Validate() error { return c.validate().errOrNil() }

// checker collects validation problems with their lines.
type checker struct {
	src  *source
	errs Errors
}

// add records a problem at path unless decoding already reported one there.
func (k *checker) add(path, format string, args ...any) {
	file := ""
	if k.src != nil {
		if k.src.bad[path] {
			return
		}
		file = k.src.file
	}
	k.errs = append(k.errs, &FieldError{File: file, Line: k.line(path), Field: path, Msg: fmt.Sprintf(format, args...)})
}

// line returns the line of path, or of its nearest ancestor that was written.
func (k *checker) line(path string) int {
	if k.src == nil {
		return 0
	}
	for {
		if l, ok := k.src.lines[path]; ok {
			return l
		}
		i := strings.LastIndexAny(path, ".[")
		if i < 0 {
			return k.src.lines[""]
		}
		path = path[:i]
	}
}

// oneOf checks that v is one of allowed.
func (k *checker) oneOf(path, v string, allowed ...string) {
	for _, a := range allowed {
		if v == a {
			return
		}
	}
	k.add(path, "%q is not allowed (allowed: %s)", v, strings.Join(allowed, ", "))
}

// intRange checks lo <= v <= hi.
func (k *checker) intRange(path string, v, lo, hi int) {
	if v < lo || v > hi {
		k.add(path, "%d is out of range (allowed: %d..%d)", v, lo, hi)
	}
}

// open checks lo < v < hi.
func (k *checker) open(path string, v, lo, hi float64) {
	if !(v > lo && v < hi) {
		k.add(path, "%v is out of range (allowed: %v < %s < %v)", v, lo, leaf(path), hi)
	}
}

// atLeast checks v >= lo (strict: v > lo), finite.
func (k *checker) atLeast(path string, v, lo float64, strict bool) {
	ok := v >= lo
	op := ">="
	if strict {
		ok, op = v > lo, ">"
	}
	if !ok || math.IsInf(v, 0) {
		k.add(path, "%v is out of range (allowed: finite, %s %v)", v, op, lo)
	}
}

// required reports whether v is non-blank, recording a problem if not.
func (k *checker) required(path, v string) bool {
	if strings.TrimSpace(v) == "" {
		k.add(path, "is required")
		return false
	}
	return true
}

// leaf returns the last element of a field path.
func leaf(path string) string { return path[strings.LastIndex(path, ".")+1:] }

// validate runs every rule and returns the problems found.
func (c *Config) validate() Errors {
	k := &checker{src: c.src}
	c.NATS.validate(k)
	c.HTTP.validate(k)
	if k.required("subject_prefix", c.SubjectPrefix) {
		if msg := checkSubject(c.SubjectPrefix, false); msg != "" {
			k.add("subject_prefix", "%q %s", c.SubjectPrefix, msg)
		}
	}
	if k.required("data_dir", c.DataDir) && strings.ContainsRune(c.DataDir, 0) {
		k.add("data_dir", "contains a NUL byte")
	}
	k.oneOf("log.level", c.Log.Level, LevelDebug, LevelInfo, LevelWarn, LevelError)
	k.oneOf("log.format", c.Log.Format, FormatAuto, FormatText, FormatJSON)
	c.validateDurability(k)
	c.validateShared(k)
	if len(c.Models) == 0 {
		k.add("models", "at least one model is required")
	}
	for i := range c.Models {
		c.Models[i].validate(k, fmt.Sprintf("models[%d]", i))
	}
	c.crossModel(k)
	return k.errs
}

// streamRE is what a stream prefix may be (a stream name may not hold '.',
// '*', '>' or white space; model names add [a-z0-9_-]).
var streamRE = regexp.MustCompile(`^[A-Za-z0-9_-]{1,32}$`)

// validateDurability checks the intake and checkpoint sections, and that
// the streams keep records long enough for a restart to find them.
func (c *Config) validateDurability(k *checker) {
	in, cp := c.Intake, c.Checkpoint
	k.oneOf("intake.mode", in.Mode, IntakeAuto, IntakeDurable, IntakeCore)
	if !streamRE.MatchString(in.StreamPrefix) {
		k.add("intake.stream_prefix", "%q is not allowed (allowed: 1 to 32 letters, digits, '_' or '-')", in.StreamPrefix)
	}
	k.intRange("checkpoint.records", cp.Records, 1, maxRecords)
	if cp.Interval < Duration(time.Second) || cp.Interval > Duration(time.Hour) {
		k.add("checkpoint.interval", "%v is out of range (allowed: 1s..1h)", cp.Interval)
	}
	k.oneOf("checkpoint.store", cp.Store, CheckpointDir, CheckpointBucket)
	if !streamRE.MatchString(cp.Bucket) {
		k.add("checkpoint.bucket", "%q is not allowed (allowed: 1 to 32 letters, digits, '_' or '-')", cp.Bucket)
	}
	k.intRange("checkpoint.replicas", cp.Replicas, 1, 5)
	if in.Mode != IntakeCore {
		if minAge := max(Duration(time.Minute), 10*cp.Interval); in.MaxAge < minAge {
			k.add("intake.max_age", "%v is too short (allowed: >= %v, ten checkpoint intervals and at least 1m, so a restart finds every record after its checkpoint)", in.MaxAge, minAge)
		}
		if in.MaxBytes < 1<<20 {
			k.add("intake.max_bytes", "%d is too small (allowed: >= 1048576)", in.MaxBytes)
		}
	}
}

// crossModel checks what involves several models: unique names, unique
// input subjects, and no input overlapping lariat's own output namespace.
func (c *Config) crossModel(k *checker) {
	names := map[string]int{}
	subjects := map[string]string{}
	var streamed []struct{ key, subj string } // model subjects, in order
	own := c.SubjectPrefix + ".>"
	for i, m := range c.Models {
		p := fmt.Sprintf("models[%d]", i)
		if j, dup := names[m.Name]; dup && m.Name != "" {
			k.add(p+".name", "%q is already the name of models[%d]", m.Name, j)
		} else {
			names[m.Name] = i
		}
		for _, f := range []struct{ key, subj string }{{"subject", m.Subject}, {"score_subject", m.ScoreSubject}} {
			if f.subj == "" || checkSubject(f.subj, true) != "" ||
				f.key == "score_subject" && (!m.Logistic() || f.subj == m.Subject) {
				continue // already reported by the model's own checks
			}
			if prev, dup := subjects[f.subj]; dup {
				k.add(p+"."+f.key, "%q is already used by %s (each input subject feeds one model)", f.subj, prev)
				continue
			}
			if c.Intake.Mode != IntakeCore && f.key == "subject" {
				for _, other := range streamed {
					if overlap(f.subj, other.subj) {
						k.add(p+".subject", "%q overlaps %q of %s: with intake.mode %s each model's subject has a stream of its own, and streams cannot share subjects (make them disjoint, or use intake.mode core)", f.subj, other.subj, other.key, c.Intake.Mode)
						break
					}
				}
				streamed = append(streamed, struct{ key, subj string }{p, f.subj})
			}
			subjects[f.subj] = p + "." + f.key
			if checkSubject(c.SubjectPrefix, false) == "" && overlap(f.subj, own) {
				k.add(p+"."+f.key, "%q overlaps lariat's own output subjects %s (change the subject or subject_prefix)", f.subj, own)
			}
		}
	}
}

// validate checks the NATS section.
func (n NATS) validate(k *checker) {
	if n.URL != "" {
		for _, u := range strings.Split(n.URL, ",") {
			if msg := checkNATSURL(strings.TrimSpace(u)); msg != "" {
				k.add("nats.url", "%s", msg)
			}
		}
	}
	if msg := checkListen(n.Listen, true); msg != "" {
		k.add("nats.listen", "%q %s", n.Listen, msg)
	}
	n.validateAuth(k)
	if n.TLS.CertFile != "" && n.TLS.KeyFile == "" {
		k.add("nats.tls.key_file", "is required with cert_file")
	}
	if n.TLS.KeyFile != "" && n.TLS.CertFile == "" {
		k.add("nats.tls.cert_file", "is required with key_file")
	}
	if n.URL == "" && n.TLS.Enabled() {
		k.add("nats.tls", "applies only to an external server (set nats.url, or remove tls)")
	}
	k.intRange("nats.pending_msgs", n.PendingMsgs, 1, math.MaxInt32)
	if n.PendingBytes < minPendingByte {
		k.add("nats.pending_bytes", "%d is out of range (allowed: >= %d, one maximum-size NATS message)", n.PendingBytes, minPendingByte)
	}
}

// authField is one authentication setting: its key and whether it is set.
type authField struct {
	key string
	set bool
}

// validateAuth checks that secret sources and authentication methods do not
// conflict, and that they are used only with an external server.
func (n NATS) validateAuth(k *checker) {
	pw := sources(k, "nats", []authField{{"password", n.Password != ""}, {"password_file", n.PasswordFile != ""}, {"password_env", n.PasswordEnv != ""}})
	tok := sources(k, "nats", []authField{{"token", n.Token != ""}, {"token_file", n.TokenFile != ""}, {"token_env", n.TokenEnv != ""}})
	checkEnv(k, "nats.password_env", n.PasswordEnv)
	checkEnv(k, "nats.token_env", n.TokenEnv)
	if n.User != "" && pw == "" {
		k.add("nats.user", "needs a password (set one of password, password_file, password_env)")
	}
	if pw != "" && n.User == "" {
		k.add("nats."+pw, "needs a user (set nats.user)")
	}
	methods := []authField{
		{"user", n.User != "" || pw != ""},
		{"token", tok != ""},
		{"credentials_file", n.CredentialsFile != ""},
		{"nkey_file", n.NKeyFile != ""},
		{"url", urlHasUser(n.URL)},
	}
	var set []string
	for _, m := range methods {
		if m.set {
			set = append(set, m.key)
		}
	}
	if len(set) > 1 {
		k.add("nats."+set[1], "conflicts with %s: use one authentication method (allowed: user+password, token, credentials_file, nkey_file, or user info in url)", set[0])
	}
	if n.URL == "" && len(set) > 0 {
		k.add("nats."+set[0], "applies only to an external server (set nats.url, or remove it)")
	}
}

// sources checks that at most one of the fields is set and returns the key
// of the first one set ("" if none).
func sources(k *checker, section string, fs []authField) string {
	first := ""
	for _, f := range fs {
		if !f.set {
			continue
		}
		if first != "" {
			k.add(section+"."+f.key, "conflicts with %s (allowed: one of %s, %s, %s)", first, fs[0].key, fs[1].key, fs[2].key)
			continue
		}
		first = f.key
	}
	return first
}

// checkEnv checks that a set environment variable name is well formed.
func checkEnv(k *checker, path, name string) {
	if name != "" && !envRE.MatchString(name) {
		k.add(path, "%q is not an environment variable name (allowed: letters, digits and _, not starting with a digit)", name)
	}
}

// validate checks the HTTP section.
func (h HTTP) validate(k *checker) {
	if msg := checkListen(h.Listen, false); msg != "" {
		k.add("http.listen", "%q %s", h.Listen, msg)
	}
	if h.AdminTokenFile != "" && h.AdminTokenEnv != "" {
		k.add("http.admin_token_env", "conflicts with admin_token_file (allowed: one of admin_token_file, admin_token_env)")
	}
	checkEnv(k, "http.admin_token_env", h.AdminTokenEnv)
	if h.MaxBodyBytes < minBody || h.MaxBodyBytes > maxBody {
		k.add("http.max_body_bytes", "%d is out of range (allowed: %d..%d)", h.MaxBodyBytes, minBody, maxBody)
	}
}

// validate checks one model; p is its path, "models[i]".
func (m *Model) validate(k *checker, p string) {
	if k.required(p+".name", m.Name) {
		if !nameRE.MatchString(m.Name) || len(m.Name) > maxNameLen {
			k.add(p+".name", "%q is not a valid name (allowed: [a-z0-9][a-z0-9_-]*, at most %d bytes)", m.Name, maxNameLen)
		}
	}
	if k.required(p+".subject", m.Subject) {
		if msg := checkSubject(m.Subject, true); msg != "" {
			k.add(p+".subject", "%q %s", m.Subject, msg)
		}
	}
	m.validateLoss(k, p)
	m.validateTraining(k, p)
	m.validateFeatures(k, p)
	m.validateAlerts(k, p)
	m.validateGuard(k, p)
	m.validateInstances(k, p)
}

// validateLoss checks loss, penalty, mix, lambda, the ladder and score_subject.
func (m *Model) validateLoss(k *checker, p string) {
	k.oneOf(p+".loss", m.Loss, LossSquared, LossLogistic)
	k.oneOf(p+".penalty", m.Penalty, PenaltyLasso, PenaltyRidge, PenaltyElasticNet)
	if m.Penalty == PenaltyElasticNet {
		if m.Mix == 0 {
			k.add(p+".mix", "is required for elastic-net (allowed: 0 < mix < 1)")
		} else {
			k.open(p+".mix", m.Mix, 0, 1)
		}
	} else if m.Mix != 0 {
		k.add(p+".mix", "is only for elastic-net (penalty is %q)", m.Penalty)
	}
	k.atLeast(p+".lambda", m.Lambda, 0, false)
	k.intRange(p+".ladder.size", m.Ladder.Size, 1, maxLadder)
	k.open(p+".ladder.floor", m.Ladder.Floor, 0, 1)
	if m.ScoreSubject != "" {
		if !m.Logistic() {
			k.add(p+".score_subject", "is only for logistic models (loss is %q)", m.Loss)
		} else if msg := checkSubject(m.ScoreSubject, true); msg != "" {
			k.add(p+".score_subject", "%q %s", m.ScoreSubject, msg)
		} else if m.ScoreSubject == m.Subject {
			k.add(p+".score_subject", "must differ from subject %q", m.Subject)
		}
	}
}

// validateTraining checks window, holdout, retune, learner and publish.
func (m *Model) validateTraining(k *checker, p string) {
	if m.Window.Records < minWindow || m.Window.Records > maxRecords {
		k.add(p+".window.records", "%d is out of range (allowed: %d..%d; the count cap applies even with a span)", m.Window.Records, minWindow, maxRecords)
	}
	if m.Window.Span < 0 {
		k.add(p+".window.span", "%v is negative (allowed: >= 0s, 0 = no time limit)", m.Window.Span)
	}
	switch e := m.Holdout.Every; {
	case e == 0 && (!m.FixedLambda() || m.Threshold.Mode != ThresholdFixed):
		k.add(p+".holdout.every", "0 (no holdout) needs a fixed lambda > 0 and threshold mode fixed: choosing λ or tuning the threshold needs held-out data (allowed: >= 2)")
	case e < 0 || e == 1:
		k.add(p+".holdout.every", "%d is out of range (allowed: 0 = off, or >= 2)", e)
	}
	k.intRange(p+".holdout.records", m.Holdout.Records, minHoldout, maxRecords)
	k.intRange(p+".retune.every", m.Retune.Every, 1, math.MaxInt32)
	k.oneOf(p+".retune.rule", m.Retune.Rule, RuleMin, RuleOneSE)
	if m.Learner.Kind != "" {
		k.oneOf(p+".learner.kind", m.Learner.Kind, LearnerGram, LearnerSAGA, LearnerDecay)
	}
	if m.Learner.Kind == LearnerGram && m.Loss != LossSquared {
		k.add(p+".learner.kind", "gram needs loss squared, not %q (allowed for %q: saga, decay)", m.Loss, m.Loss)
	}
	k.intRange(p+".learner.steps", m.Learner.Steps, 1, maxSteps)
	k.intRange(p+".learner.idle_steps", m.Learner.IdleSteps, 0, maxIdleSteps)
	k.atLeast(p+".learner.half_life", m.Learner.HalfLife, 0, true)
	if m.Publish.Heartbeat < Duration(time.Second) {
		k.add(p+".publish.heartbeat", "%v is too short (allowed: >= 1s)", m.Publish.Heartbeat)
	}
	k.atLeast(p+".publish.tolerance", m.Publish.Tolerance, 0, false)
}

// validateFeatures checks features, max_features, missing and queue.
func (m *Model) validateFeatures(k *checker, p string) {
	seen := map[string]int{}
	for i, f := range m.Features {
		fp := fmt.Sprintf("%s.features[%d]", p, i)
		switch {
		case strings.TrimSpace(f) == "":
			k.add(fp, "is empty (allowed: a non-empty feature name)")
		case strings.IndexFunc(f, unicode.IsControl) >= 0:
			k.add(fp, "%q contains a control character", f)
		case len(f) > maxFeatureName:
			k.add(fp, "is longer than %d bytes", maxFeatureName)
		}
		if j, dup := seen[f]; dup {
			k.add(fp, "%q is already features[%d]", f, j)
		}
		seen[f] = i
	}
	lo := max(1, len(m.Features))
	if m.MaxFeatures < lo || m.MaxFeatures > maxFeatureCap {
		k.add(p+".max_features", "%d is out of range (allowed: %d..%d; at least the number of features listed)", m.MaxFeatures, lo, maxFeatureCap)
	}
	k.oneOf(p+".missing", m.Missing, MissingImpute, MissingReject)
	k.intRange(p+".queue", m.Queue, 1, maxQueue)
	if m.TimeSkew < 0 || m.TimeSkew > Duration(24*time.Hour) {
		k.add(p+".time_skew", "%v is out of range (allowed: 0s..24h; 0 accepts any time)", m.TimeSkew)
	}
}

// validateAlerts checks threshold and drift.
func (m *Model) validateAlerts(k *checker, p string) {
	if !m.Logistic() {
		if m.Threshold != defaultThreshold {
			k.add(p+".threshold", "is only for logistic models (loss is %q)", m.Loss)
		}
	} else {
		k.oneOf(p+".threshold.mode", m.Threshold.Mode, ThresholdFixed, ThresholdFPR, ThresholdPrecision)
		k.open(p+".threshold.value", m.Threshold.Value, 0, 1)
		k.open(p+".threshold.target", m.Threshold.Target, 0, 1)
	}
	k.oneOf(p+".drift.performance", m.Drift.Performance, DriftADWIN, DriftPageHinkley, DriftOff)
	k.open(p+".drift.delta", m.Drift.Delta, 0, 1)
	k.atLeast(p+".drift.psi", m.Drift.PSI, 0, true)
	k.atLeast(p+".drift.mean_shift", m.Drift.MeanShift, 0, true)
	if m.Drift.Cooldown < 0 {
		k.add(p+".drift.cooldown", "%v is negative (allowed: >= 0s)", m.Drift.Cooldown)
	}
}

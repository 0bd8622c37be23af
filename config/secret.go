package config

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"strings"

	"go.yaml.in/yaml/v3"
)

// maxSecretBytes caps a secret file.
const maxSecretBytes = 64 << 10

// secretSource is where one secret comes from: a literal, a file or an
// environment variable (at most one is set after validation).
type secretSource struct {
	path    string // "nats.password"
	lit     Secret
	file    string
	fileKey string // "nats.password_file"
	env     string
	envKey  string
}

// unsetError describes an empty secret source; it matches ErrSecretUnset.
type unsetError struct{ msg string }

// Error returns the description.
func (e unsetError) Error() string { return e.msg }

// Is makes errors.Is(err, ErrSecretUnset) true.
func (e unsetError) Is(target error) bool { return target == ErrSecretUnset }

// resolve reads the secret now. It returns the value, and on failure the
// field path at fault and an error without a "config:" prefix.
func (s secretSource) resolve() (string, string, error) {
	switch {
	case s.lit != "":
		return string(s.lit), s.path, nil
	case s.file != "":
		v, err := readSecretFile(s.file)
		return v, s.fileKey, err
	case s.env != "":
		v := strings.TrimSpace(os.Getenv(s.env))
		if v == "" {
			return "", s.envKey, unsetError{fmt.Sprintf("environment variable %q is unset or empty", s.env)}
		}
		return v, s.envKey, nil
	}
	return "", "", nil
}

// get resolves the secret for an accessor, prefixing errors with the package
// and field.
func (s secretSource) get() (string, error) {
	v, field, err := s.resolve()
	if err != nil {
		return "", fmt.Errorf("config: %s: %w", field, err)
	}
	return v, nil
}

// readSecretFile reads a secret file, trimming surrounding whitespace.
func readSecretFile(name string) (string, error) {
	f, err := os.Open(name)
	if err != nil {
		return "", err
	}
	defer f.Close()
	if fi, err := f.Stat(); err == nil && fi.IsDir() {
		return "", fmt.Errorf("%s is a directory", name)
	}
	b, err := io.ReadAll(io.LimitReader(f, maxSecretBytes+1))
	if err != nil {
		return "", err
	}
	if len(b) > maxSecretBytes {
		return "", fmt.Errorf("%s is larger than %d bytes", name, maxSecretBytes)
	}
	v := strings.TrimSpace(string(b))
	if v == "" {
		return "", unsetError{fmt.Sprintf("file %s is empty", name)}
	}
	return v, nil
}

func (n NATS) password() secretSource {
	return secretSource{"nats.password", n.Password, n.PasswordFile, "nats.password_file", n.PasswordEnv, "nats.password_env"}
}

func (n NATS) token() secretSource {
	return secretSource{"nats.token", n.Token, n.TokenFile, "nats.token_file", n.TokenEnv, "nats.token_env"}
}

func (h HTTP) adminToken() secretSource {
	return secretSource{path: "http.admin_token", file: h.AdminTokenFile, fileKey: "http.admin_token_file", env: h.AdminTokenEnv, envKey: "http.admin_token_env"}
}

// ResolvePassword returns the NATS password from the literal, the file
// (surrounding whitespace trimmed) or the environment variable, read at
// the time of the call. It returns "" and nil when no password is
// configured; an empty file or unset variable gives an error wrapping
// [ErrSecretUnset].
func (n NATS) ResolvePassword() (string, error) { return n.password().get() }

// ResolveToken returns the NATS token like [NATS.ResolvePassword].
func (n NATS) ResolveToken() (string, error) { return n.token().get() }

// AdminToken returns the HTTP admin token from the file or environment
// variable, read at the time of the call. It returns "" and nil when none
// is configured, in which case state-changing calls are disabled.
func (h HTTP) AdminToken() (string, error) { return h.adminToken().get() }

// External reports whether lariat connects to an external server (URL set)
// rather than starting an embedded one.
func (n NATS) External() bool { return n.URL != "" }

// AuthMethod names the configured authentication method: "none", "user"
// (user and password), "token", "credentials", "nkey" or "url" (user info
// in the URL).
func (n NATS) AuthMethod() string {
	switch {
	case urlHasUser(n.URL):
		return "url"
	case n.CredentialsFile != "":
		return "credentials"
	case n.NKeyFile != "":
		return "nkey"
	case n.Token != "" || n.TokenFile != "" || n.TokenEnv != "":
		return "token"
	case n.User != "" || n.Password != "" || n.PasswordFile != "" || n.PasswordEnv != "":
		return "user"
	}
	return "none"
}

// natsPlain is NATS without its methods, for encoding.
type natsPlain NATS

// redactedPlain returns n with the URL's user info redacted; the Secret
// fields redact themselves.
func (n NATS) redactedPlain() natsPlain {
	p := natsPlain(n)
	p.URL = redactURL(n.URL)
	return p
}

// MarshalYAML encodes the section with secrets redacted.
func (n NATS) MarshalYAML() (any, error) { return n.redactedPlain(), nil }

// MarshalJSON encodes the section with secrets redacted.
func (n NATS) MarshalJSON() ([]byte, error) { return json.Marshal(n.redactedPlain()) }

// String returns the section as YAML with secrets redacted.
func (n NATS) String() string { return yamlString(n) }

// GoString returns the section for %#v with secrets redacted.
func (n NATS) GoString() string { return fmt.Sprintf("config.NATS%+v", n.redactedPlain()) }

// LogValue returns the section for log/slog with secrets redacted.
func (n NATS) LogValue() slog.Value {
	return slog.GroupValue(
		slog.String("url", redactURL(n.URL)),
		slog.String("listen", n.Listen),
		slog.String("auth", n.AuthMethod()),
		slog.String("user", n.User),
		slog.Bool("tls", n.TLS.Enabled()),
	)
}

// String returns the effective configuration as YAML with secrets redacted.
func (c Config) String() string { return yamlString(c) }

// LogValue returns a summary of the configuration for log/slog, secrets
// redacted.
func (c Config) LogValue() slog.Value {
	file := ""
	if c.src != nil {
		file = c.src.file
	}
	names := make([]string, len(c.Models))
	for i, m := range c.Models {
		names[i] = m.Name
	}
	admin := "none"
	if c.HTTP.AdminTokenFile != "" || c.HTTP.AdminTokenEnv != "" {
		admin = "set"
	}
	return slog.GroupValue(
		slog.String("file", file),
		slog.Any("nats", c.NATS),
		slog.String("http", c.HTTP.Listen),
		slog.String("admin_token", admin),
		slog.String("subject_prefix", c.SubjectPrefix),
		slog.String("data_dir", c.DataDir),
		slog.String("log_level", c.Log.Level),
		slog.Any("models", names),
	)
}

// yamlString encodes v as YAML with a two-space indent.
func yamlString(v any) string {
	var b strings.Builder
	enc := yaml.NewEncoder(&b)
	enc.SetIndent(2)
	if err := errors.Join(enc.Encode(v), enc.Close()); err != nil {
		return "config: " + err.Error()
	}
	return b.String()
}

package config

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
)

// Check validates c like [Config.Validate] and then checks what needs the
// file system and environment, as `lariat check` does: every configured
// secret resolves (its file is readable and non-empty, its environment
// variable is set), the credentials, NKey and TLS files are readable files,
// and data_dir, if it exists, is a directory. It returns [Errors] or nil.
// Secret values are never part of an error.
func (c *Config) Check() error {
	if err := c.Validate(); err != nil {
		return err
	}
	k := &checker{src: c.src}
	for _, s := range []secretSource{c.NATS.password(), c.NATS.token(), c.HTTP.adminToken()} {
		if _, field, err := s.resolve(); err != nil {
			k.add(field, "%v", err)
		}
	}
	for _, f := range []struct{ path, name string }{
		{"nats.credentials_file", c.NATS.CredentialsFile},
		{"nats.nkey_file", c.NATS.NKeyFile},
		{"nats.tls.ca_file", c.NATS.TLS.CAFile},
		{"nats.tls.cert_file", c.NATS.TLS.CertFile},
		{"nats.tls.key_file", c.NATS.TLS.KeyFile},
	} {
		if f.name != "" {
			if err := readable(f.name); err != nil {
				k.add(f.path, "%v", err)
			}
		}
	}
	if fi, err := os.Stat(c.DataDir); err == nil && !fi.IsDir() {
		k.add("data_dir", "%s exists and is not a directory", c.DataDir)
	} else if err != nil && !errors.Is(err, fs.ErrNotExist) {
		k.add("data_dir", "%v", err)
	}
	return k.errs.errOrNil()
}

// readable checks that name is a regular file that can be opened.
func readable(name string) error {
	f, err := os.Open(name)
	if err != nil {
		return err
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil {
		return err
	}
	if fi.IsDir() {
		return fmt.Errorf("%s is a directory", name)
	}
	return nil
}

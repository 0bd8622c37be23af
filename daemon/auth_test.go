package daemon

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"

	"lariat/config"
	"lariat/sink/natstest"
)

// TestExternalAuth connects to an external server that requires user and
// password or a token, with the secret from a file or the environment.
func TestExternalAuth(t *testing.T) {
	dir := t.TempDir()
	pwFile := filepath.Join(dir, "pw")
	os.WriteFile(pwFile, []byte("s3cret\n"), 0o600)
	t.Setenv("LARIAT_TEST_TOKEN", "tok-123")
	cases := []struct {
		name  string
		srv   server.Options
		set   func(n *config.NATS)
		ready bool
	}{
		{"user+password file", server.Options{Username: "lariat", Password: "s3cret"},
			func(n *config.NATS) { n.User, n.PasswordFile = "lariat", pwFile }, true},
		{"token env", server.Options{Authorization: "tok-123"},
			func(n *config.NATS) { n.TokenEnv = "LARIAT_TEST_TOKEN" }, true},
		{"wrong password", server.Options{Username: "lariat", Password: "other"},
			func(n *config.NATS) { n.User, n.Password = "lariat", "s3cret" }, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			o := tc.srv
			o.Host, o.Port, o.NoLog, o.NoSigs = "127.0.0.1", -1, true, true
			s, err := server.NewServer(&o)
			if err != nil {
				t.Fatal(err)
			}
			go s.Start()
			if !s.ReadyForConnections(10 * time.Second) {
				t.Fatal("server did not start")
			}
			defer s.Shutdown()
			cfg := testConfig(t, testModel("auth", "test.auth", config.LossSquared))
			cfg.NATS.URL = "nats://" + s.Addr().String()
			tc.set(&cfg.NATS)
			if err := cfg.Validate(); err != nil {
				t.Fatal(err)
			}
			td := startDaemon(t, cfg)
			if tc.ready {
				natstest.WaitFor(t, 10*time.Second, td.Ready)
				return
			}
			// Not ready, and saying why: the server's authorization
			// violation (nats.go keeps it as the connection's last error).
			natstest.WaitFor(t, 10*time.Second, func() error {
				err := td.Ready()
				if err == nil {
					return errors.New("ready with a wrong password")
				}
				if !strings.Contains(err.Error(), "uthorization") {
					return fmt.Errorf("not ready, but not for the password: %v", err)
				}
				return nil
			})
		})
	}
}

package daemon

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math/big"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/sink/natstest"
)

// testPKI is a throwaway PKI written to a temp dir: a CA, a server
// certificate for 127.0.0.1 and a client certificate signed by it, and a
// second, unrelated CA that signed nothing the server presents.
type testPKI struct {
	ca, otherCA           string // PEM CA certificates
	serverCert, serverKey string
	clientCert, clientKey string
}

// clientSubject is the common name of the client certificate; the server's
// connection list shows it when it verified the certificate.
const clientSubject = "lariat-test-client"

// newTestPKI generates the PKI with crypto/x509: ECDSA P-256 keys,
// certificates valid from a minute ago for one hour, the server's with the
// IP SAN 127.0.0.1.
func newTestPKI(t testing.TB) *testPKI {
	t.Helper()
	dir := t.TempDir()
	p := &testPKI{}
	caCert, caKey := newCA(t, dir, "lariat test CA", &p.ca)
	_, _ = newCA(t, dir, "lariat other CA", &p.otherCA)
	p.serverCert, p.serverKey = newLeaf(t, dir, "server", caCert, caKey, func(c *x509.Certificate) {
		c.ExtKeyUsage = []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}
		c.IPAddresses = []net.IP{net.IPv4(127, 0, 0, 1)}
	})
	p.clientCert, p.clientKey = newLeaf(t, dir, "client", caCert, caKey, func(c *x509.Certificate) {
		c.ExtKeyUsage = []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth}
		c.Subject.CommonName = clientSubject
	})
	return p
}

// certTemplate returns a short-lived template with a random serial number.
func certTemplate(t testing.TB, cn string) *x509.Certificate {
	t.Helper()
	serial, err := rand.Int(rand.Reader, new(big.Int).Lsh(big.NewInt(1), 62))
	if err != nil {
		t.Fatal(err)
	}
	now := time.Now()
	return &x509.Certificate{
		SerialNumber: serial,
		Subject:      pkix.Name{CommonName: cn, Organization: []string{"lariat tests"}},
		NotBefore:    now.Add(-time.Minute),
		NotAfter:     now.Add(time.Hour),
	}
}

func newKey(t testing.TB) *ecdsa.PrivateKey {
	t.Helper()
	k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	return k
}

// newCA makes a self-signed CA, writes its certificate to dir and stores
// the file name in *file.
func newCA(t testing.TB, dir, cn string, file *string) (*x509.Certificate, *ecdsa.PrivateKey) {
	t.Helper()
	key := newKey(t)
	tmpl := certTemplate(t, cn)
	tmpl.IsCA, tmpl.BasicConstraintsValid = true, true
	tmpl.KeyUsage = x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	*file = writePEM(t, filepath.Join(dir, strings.ReplaceAll(cn, " ", "-")+".pem"), "CERTIFICATE", der)
	return cert, key
}

// newLeaf makes a certificate named name signed by the CA, edited by set,
// and writes it and its key to dir.
func newLeaf(t testing.TB, dir, name string, ca *x509.Certificate, caKey *ecdsa.PrivateKey, set func(*x509.Certificate)) (certFile, keyFile string) {
	t.Helper()
	key := newKey(t)
	tmpl := certTemplate(t, "lariat test "+name)
	tmpl.KeyUsage = x509.KeyUsageDigitalSignature
	set(tmpl)
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	kder, err := x509.MarshalPKCS8PrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	return writePEM(t, filepath.Join(dir, name+".pem"), "CERTIFICATE", der),
		writePEM(t, filepath.Join(dir, name+"-key.pem"), "PRIVATE KEY", kder)
}

func writePEM(t testing.TB, path, typ string, der []byte) string {
	t.Helper()
	if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

// runTLSServer starts a NATS server (JetStream on) that speaks TLS only,
// with the PKI's server certificate; with verify it requires and verifies
// a client certificate signed by the PKI's CA.
func runTLSServer(t testing.TB, p *testPKI, verify bool) *server.Server {
	t.Helper()
	tc, err := server.GenTLSConfig(&server.TLSConfigOpts{
		CertFile: p.serverCert, KeyFile: p.serverKey, CaFile: p.ca, Verify: verify,
	})
	if err != nil {
		t.Fatal(err)
	}
	return natstest.RunServer(t, &server.Options{
		Host: "127.0.0.1", Port: -1, NoLog: true, NoSigs: true,
		JetStream: true, StoreDir: t.TempDir(),
		TLS: true, TLSVerify: verify, TLSConfig: tc, TLSTimeout: 2,
	})
}

// readyz returns the status code and body of /readyz, with a client
// timeout so a hanging daemon fails the test instead of stalling it.
func readyz(t testing.TB, d *Daemon) (int, string) {
	t.Helper()
	c := &http.Client{Timeout: 2 * time.Second}
	resp, err := c.Get("http://" + d.HTTPAddr() + "/readyz")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, string(body)
}

// TestTLS connects the daemon to an external NATS server over TLS, with
// and without client-certificate verification on the server side. A good
// setup must become ready (/readyz 200), show up on the server as a TLS
// connection (with the client certificate when the server verifies it)
// and apply published records. A bad one (CA that did not sign the server
// certificate, or no client certificate where one is required) must not
// become ready, must say why on Ready, /readyz and in the log within a few
// seconds (not hang), and must still shut down cleanly.
func TestTLS(t *testing.T) {
	p := newTestPKI(t)
	cases := []struct {
		name      string
		verify    bool   // server requires and verifies client certificates
		ca        string // the daemon's nats.tls.ca_file
		clientCrt bool   // the daemon presents the client certificate
		ready     bool
		why       string // for !ready: Ready's error must contain it
	}{
		{"server auth", false, p.ca, false, true, ""},
		{"mutual TLS", true, p.ca, true, true, ""},
		{"mutual TLS offered, not required", false, p.ca, true, true, ""},
		{"wrong CA", false, p.otherCA, false, false, "certificate signed by unknown authority"},
		{"wrong CA with client cert", true, p.otherCA, true, false, "certificate signed by unknown authority"},
		{"client cert required", true, p.ca, false, false, "certificate required"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			s := runTLSServer(t, p, tc.verify)
			const subject = "test.tls" // a server per case: no cross-talk
			cfg := testConfig(t, testModel("tls", subject, config.LossSquared))
			cfg.NATS.URL = fmt.Sprintf("tls://127.0.0.1:%d", s.Addr().(*net.TCPAddr).Port)
			cfg.NATS.TLS.CAFile = tc.ca
			if tc.clientCrt {
				cfg.NATS.TLS.CertFile, cfg.NATS.TLS.KeyFile = p.clientCert, p.clientKey
			}
			if err := cfg.Validate(); err != nil {
				t.Fatal(err)
			}
			if err := cfg.Check(); err != nil {
				t.Fatal(err)
			}
			var logs syncBuffer
			td := startDaemon(t, cfg, WithLogger(slog.New(slog.NewTextHandler(&logs, nil))))
			if !tc.ready {
				checkTLSRefused(t, td, tc.why)
				if s := logs.String(); !strings.Contains(s, "NATS connection failed") || !strings.Contains(s, tc.why) {
					t.Errorf("no log line naming the cause %q:\n%s", tc.why, s)
				}
				return
			}
			natstest.WaitFor(t, 5*time.Second, func() error {
				if code, body := readyz(t, td.Daemon); code != http.StatusOK {
					return fmt.Errorf("/readyz %d: %s", code, body)
				}
				return nil
			})
			checkServerSawTLS(t, s, tc.verify && tc.clientCrt)
			checkTLSRecordsApplied(t, td, p, cfg.NATS.URL, subject)
		})
	}
}

// checkTLSRefused waits (bounded) for Ready and /readyz to report the TLS
// failure with reason why, checks the daemon stays unready, and that it
// stops promptly.
func checkTLSRefused(t *testing.T, td *testDaemon, why string) {
	t.Helper()
	start := time.Now()
	natstest.WaitFor(t, 5*time.Second, func() error {
		err := td.Ready()
		if err == nil {
			return errors.New("ready over a TLS connection that must fail")
		}
		if !strings.Contains(err.Error(), why) {
			return fmt.Errorf("Ready() = %q, want it to name the cause (%q)", err, why)
		}
		return nil
	})
	t.Logf("Ready() after %s: %v", time.Since(start).Round(time.Millisecond), td.Ready())
	code, body := readyz(t, td.Daemon)
	if code != http.StatusServiceUnavailable || !strings.Contains(body, why) {
		t.Errorf("/readyz %d %s, want 503 naming %q", code, body, why)
	}
	if got := td.conn.Load().Status(); got == nats.CONNECTED {
		t.Errorf("NATS status %s", got)
	}
	stopped := time.Now()
	if err := td.stop(t); err != nil {
		t.Errorf("Run: %v", err)
	}
	if took := time.Since(stopped); took > 5*time.Second {
		t.Errorf("stopping an unconnected daemon took %s", took)
	}
}

// checkServerSawTLS checks the server lists the daemon's connection as TLS,
// with the client certificate's subject when it verified one.
func checkServerSawTLS(t *testing.T, s *server.Server, clientCert bool) {
	t.Helper()
	cz, err := s.Connz(&server.ConnzOptions{Username: true})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range cz.Conns {
		if c.Name != "lariat" {
			continue
		}
		if c.TLSVersion == "" {
			t.Errorf("daemon connection is not TLS: %+v", c)
		}
		sawClient := len(c.TLSPeerCerts) > 0 && strings.Contains(c.TLSPeerCerts[0].Subject, clientSubject)
		if sawClient != clientCert {
			t.Errorf("server saw the client certificate: %v, want %v (peer certs %+v)", sawClient, clientCert, c.TLSPeerCerts)
		}
		return
	}
	t.Errorf("no connection named lariat among %d", len(cz.Conns))
}

// checkTLSRecordsApplied publishes records over TLS (as a verified client)
// and waits until the model has accepted every one and published a model.
func checkTLSRecordsApplied(t *testing.T, td *testDaemon, p *testPKI, url, subject string) {
	t.Helper()
	const n = 300 // > retune.every (250), so λ is chosen and a model goes out
	nc, err := nats.Connect(url, nats.Name("test-client"),
		nats.RootCAs(p.ca), nats.ClientCert(p.clientCert, p.clientKey))
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	for _, rec := range sparseTruth(4).records(n, false, 11) {
		if err := nc.Publish(subject, rec); err != nil {
			t.Fatal(err)
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	labels := map[string]string{"model": "tls"}
	natstest.WaitFor(t, 5*time.Second, func() error {
		if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", labels); got != n {
			return fmt.Errorf("accepted %v of %d", got, n)
		}
		if _, _, err := getDoc(td.Daemon, "tls"); err != nil {
			return err
		}
		return nil
	})
}

// Package smtptest runs a real mail server for tests: Debian's aiosmtpd
// (package python3-aiosmtpd; .ci/run installs it) in its own process on the
// loopback, storing what it accepts in a Maildir the test reads back. It
// refuses (5xx), defers (4xx), acknowledges late, or is down, as the test
// asks; it can require STARTTLS or implicit TLS with a certificate made for
// the test, and authentication. Nothing of SMTP is faked inside Go.
//
// A missing aiosmtpd fails the test, never skips it.
package smtptest

import (
	"bufio"
	"bytes"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/x509"
	"crypto/x509/pkix"
	_ "embed"
	"encoding/pem"
	"fmt"
	"io"
	"math/big"
	"net"
	"net/mail"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

//go:embed server.py
var script []byte

// Mode is how the server answers.
type Mode string

// The modes of the server.
const (
	Accept  Mode = "accept"   // take every message
	Refuse  Mode = "refuse"   // 550 to every recipient: a permanent refusal
	Defer   Mode = "defer"    // 451 to every recipient: a temporary refusal
	SlowAck Mode = "slow-ack" // store the message, answer 250 an hour later
)

// TLS modes.
const (
	NoTLS    = "none"
	STARTTLS = "starttls"
	Implicit = "implicit"
)

// Options choose encryption and authentication.
type Options struct {
	TLS      string // NoTLS (default), STARTTLS or Implicit
	User     string // with Password: authentication required (over TLS)
	Password string
}

// Server is a running test mail server.
type Server struct {
	tb      testing.TB
	Host    string // 127.0.0.1
	Port    int
	Dir     string // the Maildir
	CAFile  string // PEM of the authority that signed the server's certificate (TLS modes)
	control string
	cmd     *exec.Cmd
	opts    Options
	certs   [2]string
}

// Python finds a python3 that has aiosmtpd: Debian's /usr/bin/python3
// first (a python3 earlier on the PATH may be another installation), then
// the PATH's.
func Python() (string, error) {
	for _, p := range []string{"/usr/bin/python3", "python3"} {
		path, err := exec.LookPath(p)
		if err != nil {
			continue
		}
		if exec.Command(path, "-c", "import aiosmtpd").Run() == nil {
			return path, nil
		}
	}
	return "", fmt.Errorf("smtptest: no python3 with aiosmtpd: install Debian's python3-aiosmtpd (apt-get install -y python3-aiosmtpd; .ci/run installs it)")
}

// Start runs a server until the test ends.
func Start(tb testing.TB, o Options) *Server {
	tb.Helper()
	py, err := Python()
	if err != nil {
		tb.Fatal(err)
	}
	dir := tb.TempDir()
	s := &Server{tb: tb, Host: "127.0.0.1", Dir: filepath.Join(dir, "Maildir"), control: filepath.Join(dir, "mode"), opts: o}
	if o.TLS == "" {
		s.opts.TLS = NoTLS
	}
	if err := os.WriteFile(filepath.Join(dir, "server.py"), script, 0o600); err != nil {
		tb.Fatal(err)
	}
	if s.opts.TLS != NoTLS {
		s.CAFile, s.certs = makeCerts(tb, dir)
	}
	s.SetMode(Accept)
	s.start(py, filepath.Join(dir, "server.py"))
	tb.Cleanup(s.Stop)
	return s
}

// start launches the process on a free port, retrying when another process
// took the port between choosing and binding it.
func (s *Server) start(py, path string) {
	s.tb.Helper()
	var lastErr string
	for range 5 {
		port := freePort(s.tb)
		cmd := exec.Command(py, path, s.Host, strconv.Itoa(port), s.Dir, s.control, s.opts.TLS, s.certs[0], s.certs[1], s.opts.User, s.opts.Password)
		cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true, Pdeathsig: syscall.SIGKILL}
		var stderr bytes.Buffer
		cmd.Stderr = &stderr
		out, err := cmd.StdoutPipe()
		if err != nil {
			s.tb.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			s.tb.Fatalf("smtptest: start %s: %v", py, err)
		}
		ready := make(chan bool, 1)
		go func() {
			line, _ := bufio.NewReader(out).ReadString('\n')
			ready <- strings.TrimSpace(line) == "READY"
			io.Copy(io.Discard, out)
		}()
		select {
		case ok := <-ready:
			if ok {
				s.cmd, s.Port = cmd, port
				return
			}
		case <-time.After(30 * time.Second):
		}
		_ = cmd.Process.Kill()
		_ = cmd.Wait()
		lastErr = stderr.String()
	}
	s.tb.Fatalf("smtptest: the mail server did not start:\n%s", lastErr)
}

func freePort(tb testing.TB) int {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		tb.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// SetMode changes how the server answers from the next transaction on.
func (s *Server) SetMode(m Mode) {
	if err := os.WriteFile(s.control, []byte(m), 0o600); err != nil {
		s.tb.Fatal(err)
	}
}

// Stop ends the server: nothing listens on its port any more (the "down"
// case). It is safe to call twice.
func (s *Server) Stop() {
	if s.cmd == nil || s.cmd.Process == nil {
		return
	}
	_ = syscall.Kill(-s.cmd.Process.Pid, syscall.SIGKILL)
	_ = s.cmd.Wait()
	s.cmd = nil
}

// Received is one message the server stored.
type Received struct {
	Envelope string // what the server saw: from, to, whether authenticated and encrypted
	Header   mail.Header
	Body     string
	Raw      []byte
}

// Messages reads the messages stored so far, in the order they arrived.
func (s *Server) Messages() []Received {
	s.tb.Helper()
	var out []Received
	for _, sub := range []string{"new", "cur"} {
		entries, err := os.ReadDir(filepath.Join(s.Dir, sub))
		if err != nil {
			continue
		}
		type file struct {
			path string
			mod  time.Time
		}
		var files []file
		for _, e := range entries {
			info, err := e.Info()
			if err == nil {
				files = append(files, file{filepath.Join(s.Dir, sub, e.Name()), info.ModTime()})
			}
		}
		sort.SliceStable(files, func(i, j int) bool {
			return files[i].mod.Before(files[j].mod) || files[i].mod.Equal(files[j].mod) && files[i].path < files[j].path
		})
		for _, f := range files {
			raw, err := os.ReadFile(f.path)
			if err != nil {
				s.tb.Fatal(err)
			}
			m, err := mail.ReadMessage(bytes.NewReader(raw))
			if err != nil {
				s.tb.Fatalf("smtptest: stored message %s: %v", f.path, err)
			}
			body, _ := io.ReadAll(m.Body)
			out = append(out, Received{Envelope: m.Header.Get("X-Test-Envelope"), Header: m.Header, Body: string(body), Raw: raw})
		}
	}
	return out
}

// Wait returns the stored messages once there are at least n, failing the
// test after timeout.
func (s *Server) Wait(n int, timeout time.Duration) []Received {
	s.tb.Helper()
	deadline := time.Now().Add(timeout)
	for {
		got := s.Messages()
		if len(got) >= n {
			return got
		}
		if time.Now().After(deadline) {
			s.tb.Fatalf("smtptest: %d messages stored after %v, want %d", len(got), timeout, n)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// makeCerts writes a certificate authority and a server certificate for
// 127.0.0.1 and localhost signed by it, and returns the authority's file and
// the server's certificate and key files.
func makeCerts(tb testing.TB, dir string) (string, [2]string) {
	tb.Helper()
	caKey, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		tb.Fatal(err)
	}
	now := time.Now()
	ca := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "smtptest authority"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(24 * time.Hour), IsCA: true, BasicConstraintsValid: true,
		KeyUsage: x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature}
	caDER, err := x509.CreateCertificate(rand.Reader, ca, ca, &caKey.PublicKey, caKey)
	if err != nil {
		tb.Fatal(err)
	}
	caCert, _ := x509.ParseCertificate(caDER)
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		tb.Fatal(err)
	}
	leaf := &x509.Certificate{SerialNumber: big.NewInt(2), Subject: pkix.Name{CommonName: "127.0.0.1"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(24 * time.Hour), DNSNames: []string{"localhost"},
		IPAddresses: []net.IP{net.ParseIP("127.0.0.1")}, KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}
	leafDER, err := x509.CreateCertificate(rand.Reader, leaf, caCert, &key.PublicKey, caKey)
	if err != nil {
		tb.Fatal(err)
	}
	keyDER, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		tb.Fatal(err)
	}
	write := func(name, typ string, der []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
			tb.Fatal(err)
		}
		return p
	}
	return write("ca.pem", "CERTIFICATE", caDER), [2]string{write("server.pem", "CERTIFICATE", leafDER), write("server.key", "EC PRIVATE KEY", keyDER)}
}

package pgcluster

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"github.com/jackc/pgx/v5"
)

func ping(t *testing.T, c *Cluster) {
	t.Helper()
	conn, err := pgx.Connect(context.Background(), c.URL("postgres"))
	if err != nil {
		t.Fatalf("connect: %v", err)
	}
	defer conn.Close(context.Background())
	var one int
	if err := conn.QueryRow(context.Background(), "SELECT 1").Scan(&one); err != nil || one != 1 {
		t.Fatalf("query: %v", err)
	}
}

// tempDir is a folder the unprivileged server user can reach when the tests
// run as root (t.TempDir may sit under a private folder).
func tempDir(t *testing.T) string {
	t.Helper()
	d, err := os.MkdirTemp("", "cluster-test-")
	if err != nil {
		t.Fatal(err)
	}
	os.Chmod(d, 0o755)
	t.Cleanup(func() { os.RemoveAll(d) })
	return d
}

// kill stops the server and its children without a clean shutdown, as a
// machine crash would. The server leads its own process group (Setpgid), so
// this reaches the backends too.
func kill(t *testing.T, c *Cluster) {
	t.Helper()
	if c == nil || c.cmd == nil || c.cmd.Process == nil {
		t.Fatal("kill: no server running")
	}
	if err := syscall.Kill(-c.cmd.Process.Pid, syscall.SIGKILL); err != nil {
		t.Fatalf("kill: %v", err)
	}
	<-c.done
}

func TestStartStopRestartAndStalePID(t *testing.T) {
	dir := filepath.Join(tempDir(t), "pg")
	c, err := Start(context.Background(), Config{Dir: dir, Fast: true}, os.Getenv)
	if err != nil {
		t.Fatal(err)
	}
	ping(t, c)
	if err := c.Stop(); err != nil {
		t.Fatal(err)
	}
	// A second start reuses the cluster.
	c, err = Start(context.Background(), Config{Dir: dir, Fast: true}, os.Getenv)
	if err != nil {
		t.Fatal(err)
	}
	ping(t, c)
	// A crash leaves postmaster.pid behind; then the PID is reused by an
	// unrelated process (here: this test). Start must recover.
	kill(t, c)
	pidFile := filepath.Join(dir, "pgdata", "postmaster.pid")
	b, err := os.ReadFile(pidFile)
	if err != nil {
		t.Fatalf("no postmaster.pid after a kill: %v", err)
	}
	lines := strings.SplitN(string(b), "\n", 2)
	if err := os.WriteFile(pidFile, []byte(fmt.Sprintf("%d\n%s", os.Getpid(), lines[1])), 0o600); err != nil {
		t.Fatal(err)
	}
	c2, err := Start(context.Background(), Config{Dir: dir, Fast: true}, os.Getenv)
	if err != nil {
		t.Fatalf("start after a crash with a stale postmaster.pid: %v", err)
	}
	ping(t, c2)
	// A second server on the same folder is refused with a clear message.
	if _, err := Start(context.Background(), Config{Dir: dir, Fast: true}, os.Getenv); err == nil || !strings.Contains(err.Error(), "already running") {
		t.Fatalf("second server on one folder: %v", err)
	}
	c2.Stop()
}

func TestLongPathUsesShortSocketFolder(t *testing.T) {
	dir := filepath.Join(tempDir(t), strings.Repeat("deep-folder-name/", 6), "pg")
	c, err := Start(context.Background(), Config{Dir: dir, Fast: true}, os.Getenv)
	if err != nil {
		t.Fatal(err)
	}
	defer c.Stop()
	if c.sockDir == c.Dir() || len(filepath.Join(c.sockDir, ".s.PGSQL.5432")) > 107 {
		t.Fatalf("socket folder %q", c.sockDir)
	}
	ping(t, c)
}

func TestUnreachableFolderIsExplained(t *testing.T) {
	if os.Geteuid() != 0 {
		t.Skip("this check applies only when running as root")
	}
	private := filepath.Join(tempDir(t), "private")
	if err := os.Mkdir(private, 0o700); err != nil {
		t.Fatal(err)
	}
	_, err := Start(context.Background(), Config{Dir: filepath.Join(private, "pg")}, os.Getenv)
	var ue *UnreachableError
	if !errors.As(err, &ue) {
		t.Fatalf("err %v, want an explanation of the unreachable folder", err)
	}
	msg := err.Error()
	for _, want := range []string{private, "mode 0700", "--data", "chmod o+x"} {
		if !strings.Contains(msg, want) {
			t.Errorf("message lacks %q: %s", want, msg)
		}
	}
	if strings.Contains(msg, "fork/exec") {
		t.Errorf("bare exec error leaked: %s", msg)
	}
}

func TestMissingBinariesSayWhatToInstall(t *testing.T) {
	_, err := FindBinaries(func(k string) string {
		if k == "PG_BIN" {
			return "/nonexistent"
		}
		return ""
	})
	if err == nil || !strings.Contains(err.Error(), "PG_BIN") {
		t.Fatalf("bad PG_BIN: %v", err)
	}
	if !strings.Contains(ErrNoBinaries.Error(), "apt-get install") {
		t.Fatalf("message does not say what to install: %v", ErrNoBinaries)
	}
}

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
	"time"

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

// TestStandbyFollowsThePrimary starts a primary and a standby copied from it,
// and shows a row written on the primary reaching the standby by streaming
// replication, the standby refusing writes, and a stopped standby resuming
// (and catching up) when started again.
func TestStandbyFollowsThePrimary(t *testing.T) {
	ctx := context.Background()
	base := tempDir(t)
	p, err := Start(ctx, Config{Dir: filepath.Join(base, "primary"), Port: 5601, Fast: true}, os.Getenv)
	if err != nil {
		t.Fatal(err)
	}
	defer p.Stop()
	exec := func(c *Cluster, sql string) error {
		conn, err := pgx.Connect(ctx, c.URL("postgres"))
		if err != nil {
			return err
		}
		defer conn.Close(ctx)
		_, err = conn.Exec(ctx, sql)
		return err
	}
	if err := exec(p, `CREATE TABLE t (n int)`); err != nil {
		t.Fatal(err)
	}
	if _, err := StartStandby(ctx, p, Config{Dir: filepath.Join(base, "standby"), Port: 5601}, os.Getenv); err == nil {
		t.Fatal("a standby on the primary's port was accepted")
	}
	s, err := StartStandby(ctx, p, Config{Dir: filepath.Join(base, "standby"), Port: 5602, Fast: true}, os.Getenv)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Stop()
	count := func(want int) {
		t.Helper()
		conn, err := pgx.Connect(ctx, s.URL("postgres"))
		if err != nil {
			t.Fatal(err)
		}
		defer conn.Close(ctx)
		var n int
		var recovering bool
		for range 500 {
			if err := conn.QueryRow(ctx, `SELECT pg_is_in_recovery(), (SELECT count(*) FROM t)`).Scan(&recovering, &n); err != nil {
				t.Fatal(err)
			}
			if n == want {
				break
			}
			time.Sleep(10 * time.Millisecond)
		}
		if !recovering || n != want {
			t.Fatalf("standby: in recovery %v, %d rows, want %d", recovering, n, want)
		}
	}
	if err := exec(p, `INSERT INTO t VALUES (1)`); err != nil {
		t.Fatal(err)
	}
	count(1)
	if err := exec(s, `INSERT INTO t VALUES (2)`); err == nil || !strings.Contains(err.Error(), "read-only") {
		t.Errorf("a write on the standby: %v, want a read-only refusal", err)
	}
	if err := s.Stop(); err != nil {
		t.Fatal(err)
	}
	if err := exec(p, `INSERT INTO t VALUES (3)`); err != nil {
		t.Fatal(err)
	}
	if s, err = StartStandby(ctx, p, Config{Dir: filepath.Join(base, "standby"), Port: 5602, Fast: true}, os.Getenv); err != nil {
		t.Fatal(err)
	}
	count(2)
}

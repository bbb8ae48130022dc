// Package pgcluster starts and stops a private PostgreSQL server from the binaries installed on
// the machine. The demo command and the database tests share it, so the code that
// a user runs is the code that the tests prove.
//
// PostgreSQL refuses to run as root. When the caller is root the server
// processes run as an unprivileged system user (postgres by default), the data
// folder is owned by that user, and every parent folder must let that user pass;
// Start checks this first and explains what to do instead of failing later with a
// bare "permission denied".
package pgcluster

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"net/url"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"syscall"
	"time"
)

// Config says where and how to run the server.
type Config struct {
	// Dir is the folder that holds the cluster (Dir/pgdata) and its log
	// (Dir/server.log). It is created when missing.
	Dir string
	// Port names the Unix socket (.s.PGSQL.<Port>); with TCP off no network port
	// is opened. Zero means 5432.
	Port int
	// TCP also listens on 127.0.0.1:Port. Off unless something needs it.
	TCP bool
	// Superuser is the database role created by initdb. Empty means "cohortdesk".
	Superuser string
	// RunAs is the system user that runs the server when the caller is root.
	// Empty means "postgres".
	RunAs string
	// Fast turns off durability (fsync, full-page writes): for tests only.
	Fast bool
	// Settings are extra server settings passed as -c name=value.
	Settings map[string]string
}

// Cluster is a running private server.
type Cluster struct {
	cfg     Config
	pgdata  string
	sockDir string
	binDir  string
	cmd     *exec.Cmd
	logFile *os.File
	done    chan error
	cred    *syscall.Credential
	stopped bool
}

// ErrNoBinaries means no PostgreSQL server programs were found.
var ErrNoBinaries = errors.New("cluster: PostgreSQL server programs (initdb, postgres) not found; install them, e.g. `apt-get install -y postgresql` on Debian or Ubuntu, or set PG_BIN to the folder that holds them")

// FindBinaries returns the folder holding initdb and postgres: $PG_BIN when set,
// else the PATH, else the newest /usr/lib/postgresql/<version>/bin.
func FindBinaries(getenv func(string) string) (string, error) {
	if d := getenv("PG_BIN"); d != "" {
		if isExec(filepath.Join(d, "initdb")) && isExec(filepath.Join(d, "postgres")) {
			return d, nil
		}
		return "", fmt.Errorf("cluster: PG_BIN=%s does not hold initdb and postgres", d)
	}
	if p, err := exec.LookPath("postgres"); err == nil {
		if real, err := filepath.EvalSymlinks(p); err == nil {
			p = real
		}
		d := filepath.Dir(p)
		if isExec(filepath.Join(d, "initdb")) {
			return d, nil
		}
	}
	matches, _ := filepath.Glob("/usr/lib/postgresql/*/bin")
	sort.Slice(matches, func(i, j int) bool { return versionOf(matches[i]) > versionOf(matches[j]) })
	for _, d := range matches {
		if isExec(filepath.Join(d, "initdb")) && isExec(filepath.Join(d, "postgres")) {
			return d, nil
		}
	}
	return "", ErrNoBinaries
}

func versionOf(binDir string) int {
	v, _ := strconv.Atoi(filepath.Base(filepath.Dir(binDir)))
	return v
}

func isExec(p string) bool {
	st, err := os.Stat(p)
	return err == nil && !st.IsDir() && st.Mode()&0o111 != 0
}

// Start creates the cluster on first use, then starts the server and waits until
// it accepts connections. The server stops when Stop is called or, as a last
// resort, when the calling process dies.
func Start(ctx context.Context, cfg Config, getenv func(string) string) (*Cluster, error) {
	if cfg.Port == 0 {
		cfg.Port = 5432
	}
	if cfg.Superuser == "" {
		cfg.Superuser = "cohortdesk"
	}
	if cfg.RunAs == "" {
		cfg.RunAs = "postgres"
	}
	dir, err := filepath.Abs(cfg.Dir)
	if err != nil {
		return nil, fmt.Errorf("cluster: data folder %q: %w", cfg.Dir, err)
	}
	cfg.Dir = dir
	binDir, err := FindBinaries(getenv)
	if err != nil {
		return nil, err
	}
	c := &Cluster{cfg: cfg, pgdata: filepath.Join(dir, "pgdata"), binDir: binDir}

	if os.Geteuid() == 0 {
		cred, err := credentialFor(cfg.RunAs)
		if err != nil {
			return nil, err
		}
		c.cred = cred
		if err := checkReachable(dir, cred); err != nil {
			return nil, err
		}
	}
	// Missing parents are made traversable (0755) so the server user can pass
	// them; the data folder itself stays private to that user.
	if err := mkdirTraversable(filepath.Dir(dir)); err != nil {
		return nil, fmt.Errorf("cluster: create data folder: %w", err)
	}
	if err := os.Mkdir(dir, 0o700); err != nil && !errors.Is(err, fs.ErrExist) {
		return nil, fmt.Errorf("cluster: create data folder: %w", err)
	}
	if err := c.chown(dir); err != nil {
		return nil, err
	}
	c.sockDir, err = c.socketDir()
	if err != nil {
		return nil, err
	}
	if _, err := os.Stat(filepath.Join(c.pgdata, "PG_VERSION")); errors.Is(err, fs.ErrNotExist) {
		if err := c.initdb(ctx); err != nil {
			return nil, err
		}
	} else if err != nil {
		return nil, fmt.Errorf("cluster: %w", err)
	}
	if err := c.clearStalePID(); err != nil {
		return nil, err
	}
	// After a crash, a zombie of the old server can hold the lock file, and
	// its children the shared memory, for a moment: retry.
	var lastErr error
	for attempt := 0; attempt < 6; attempt++ {
		if lastErr = c.start(ctx); lastErr == nil {
			return c, nil
		}
		if !transientStartError(lastErr) {
			break
		}
		time.Sleep(time.Duration(100<<attempt) * time.Millisecond)
	}
	return nil, lastErr
}

// transientStartError reports start failures that a crashed server's leftover
// processes cause and that pass once they are gone.
func transientStartError(err error) bool {
	msg := err.Error()
	return strings.Contains(msg, "lock file") || strings.Contains(msg, "shared memory block")
}

// credentialFor looks up the unprivileged user that runs the server for root.
func credentialFor(name string) (*syscall.Credential, error) {
	u, err := user.Lookup(name)
	if err != nil {
		return nil, fmt.Errorf("cluster: running as root, PostgreSQL must run as an unprivileged user, but user %q does not exist (%v); create it (e.g. `useradd --system %s`) or run as an ordinary user", name, err, name)
	}
	uid, _ := strconv.Atoi(u.Uid)
	gid, _ := strconv.Atoi(u.Gid)
	if uid == 0 {
		return nil, fmt.Errorf("cluster: user %q is root; PostgreSQL needs an unprivileged user", name)
	}
	return &syscall.Credential{Uid: uint32(uid), Gid: uint32(gid)}, nil
}

// checkReachable proves that the server user can walk down to dir. Without this
// the server's chdir fails after the user switch and exec reports a misleading
// "fork/exec ...: permission denied".
func checkReachable(dir string, cred *syscall.Credential) error {
	parts := strings.Split(filepath.Clean(dir), string(filepath.Separator))
	p := "/"
	for _, part := range parts {
		if part == "" {
			continue
		}
		parent := p
		p = filepath.Join(p, part)
		st, err := os.Stat(parent)
		if err != nil {
			return fmt.Errorf("cluster: %w", err)
		}
		if !canEnter(st, cred) {
			return &UnreachableError{Dir: dir, Blocker: parent, Mode: st.Mode().Perm(), Uid: cred.Uid}
		}
		if _, err := os.Stat(p); errors.Is(err, fs.ErrNotExist) {
			return nil // the rest is created by us and chowned
		}
	}
	return nil
}

// mkdirTraversable creates dir and its missing parents with mode 0755 whatever
// the umask, so another user can pass through them.
func mkdirTraversable(dir string) error {
	if _, err := os.Stat(dir); err == nil {
		return nil
	}
	if err := mkdirTraversable(filepath.Dir(dir)); err != nil {
		return err
	}
	if err := os.Mkdir(dir, 0o755); err != nil && !errors.Is(err, fs.ErrExist) {
		return err
	}
	return os.Chmod(dir, 0o755)
}

func canEnter(st fs.FileInfo, cred *syscall.Credential) bool {
	sys, ok := st.Sys().(*syscall.Stat_t)
	if !ok {
		return true
	}
	m := st.Mode().Perm()
	switch {
	case sys.Uid == cred.Uid:
		return m&0o100 != 0
	case sys.Gid == cred.Gid:
		return m&0o010 != 0
	default:
		return m&0o001 != 0
	}
}

// UnreachableError says which folder stops the server user and what to do.
type UnreachableError struct {
	Dir     string
	Blocker string
	Mode    fs.FileMode
	Uid     uint32
}

func (e *UnreachableError) Error() string {
	return fmt.Sprintf("cluster: the PostgreSQL server runs as an unprivileged user (uid %d) because this program runs as root, "+
		"and that user cannot enter %s (mode %#o), so it cannot reach the data folder %s. "+
		"Choose a data folder it can reach, for example --data /var/lib/cohortdesk, "+
		"or let it pass with `chmod o+x %s`", e.Uid, e.Blocker, e.Mode, e.Dir, e.Blocker)
}

func (c *Cluster) chown(paths ...string) error {
	if c.cred == nil {
		return nil
	}
	for _, p := range paths {
		if err := os.Chown(p, int(c.cred.Uid), int(c.cred.Gid)); err != nil {
			return fmt.Errorf("cluster: give %s to the server user: %w", p, err)
		}
	}
	return nil
}

// socketDir is the data folder itself when the socket path fits the 107-byte
// limit of Unix socket names, else a short private folder under /tmp.
func (c *Cluster) socketDir() (string, error) {
	name := fmt.Sprintf(".s.PGSQL.%d", c.cfg.Port)
	if len(filepath.Join(c.cfg.Dir, name)) <= 100 {
		return c.cfg.Dir, nil
	}
	d, err := os.MkdirTemp("", "cohortdesk-sock-")
	if err != nil {
		return "", fmt.Errorf("cluster: socket folder: %w", err)
	}
	if err := c.chown(d); err != nil {
		return "", err
	}
	return d, nil
}

func (c *Cluster) command(ctx context.Context, name string, args ...string) *exec.Cmd {
	cmd := exec.CommandContext(ctx, filepath.Join(c.binDir, name), args...)
	cmd.Dir = c.cfg.Dir
	cmd.Env = []string{"PATH=" + c.binDir + ":/usr/bin:/bin", "LC_ALL=C", "TZ=UTC"}
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true, Credential: c.cred}
	return cmd
}

func (c *Cluster) initdb(ctx context.Context) error {
	if err := os.MkdirAll(c.pgdata, 0o700); err != nil {
		return fmt.Errorf("cluster: %w", err)
	}
	if err := c.chown(c.pgdata); err != nil {
		return err
	}
	cmd := c.command(ctx, "initdb", "-D", c.pgdata, "-A", "trust", "-U", c.cfg.Superuser,
		"-E", "UTF8", "--locale=C", "--no-sync", "--no-instructions")
	out, err := cmd.CombinedOutput()
	if err != nil {
		return fmt.Errorf("cluster: initdb in %s failed: %w\n%s", c.pgdata, err, out)
	}
	return nil
}

// clearStalePID removes a postmaster.pid whose process is gone or is not a
// PostgreSQL server, and refuses when a live server owns the folder.
func (c *Cluster) clearStalePID() error {
	pidFile := filepath.Join(c.pgdata, "postmaster.pid")
	b, err := os.ReadFile(pidFile)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	} else if err != nil {
		return fmt.Errorf("cluster: %w", err)
	}
	first, _, _ := strings.Cut(string(b), "\n")
	pid, err := strconv.Atoi(strings.TrimSpace(first))
	if err != nil || pid <= 0 {
		return os.Remove(pidFile)
	}
	cmdline, err := os.ReadFile(fmt.Sprintf("/proc/%d/cmdline", pid))
	if err != nil || !strings.Contains(string(cmdline), "postgres") {
		// The process is gone, or the PID now belongs to something else.
		return os.Remove(pidFile)
	}
	stat, _ := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if f := strings.Fields(string(stat)); len(f) > 2 && f[2] == "Z" {
		return nil // a zombie: the retry loop in Start waits for it
	}
	if strings.Contains(string(cmdline), c.pgdata) {
		return fmt.Errorf("cluster: a PostgreSQL server (PID %d) is already running on %s; stop it first (kill -INT %d) or choose another data folder", pid, c.pgdata, pid)
	}
	return os.Remove(pidFile)
}

func (c *Cluster) start(ctx context.Context) error {
	logPath := filepath.Join(c.cfg.Dir, "server.log")
	lf, err := os.OpenFile(logPath, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o600)
	if err != nil {
		return fmt.Errorf("cluster: open server log: %w", err)
	}
	listen := ""
	if c.cfg.TCP {
		listen = "127.0.0.1"
	}
	args := []string{"-D", c.pgdata, "-k", c.sockDir, "-p", strconv.Itoa(c.cfg.Port),
		"-c", "listen_addresses=" + listen,
		"-c", "TimeZone=UTC", "-c", "log_timezone=UTC",
		"-c", "max_connections=200", "-c", "shared_buffers=256MB"}
	if c.cfg.Fast {
		args = append(args, "-c", "fsync=off", "-c", "full_page_writes=off", "-c", "synchronous_commit=off")
	}
	keys := make([]string, 0, len(c.cfg.Settings))
	for k := range c.cfg.Settings {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		args = append(args, "-c", k+"="+c.cfg.Settings[k])
	}
	// Not tied to ctx: the server must outlive the start-up context and stop only
	// through Stop, after the web server has finished.
	cmd := c.command(context.Background(), "postgres", args...)
	cmd.Stdout = lf
	cmd.Stderr = lf
	cmd.SysProcAttr.Pdeathsig = syscall.SIGQUIT
	if err := cmd.Start(); err != nil {
		lf.Close()
		return fmt.Errorf("cluster: start postgres: %w", err)
	}
	c.cmd, c.logFile = cmd, lf
	c.done = make(chan error, 1)
	go func() { c.done <- cmd.Wait() }()

	deadline := time.NewTimer(60 * time.Second)
	defer deadline.Stop()
	tick := time.NewTicker(10 * time.Millisecond)
	defer tick.Stop()
	for {
		if c.ready() {
			return nil
		}
		select {
		case err := <-c.done:
			lf.Close()
			return fmt.Errorf("cluster: postgres exited during start-up (%v); its log %s ends with:\n%s", err, logPath, tail(logPath, 15))
		case <-ctx.Done():
			c.Stop()
			return fmt.Errorf("cluster: start cancelled: %w", ctx.Err())
		case <-deadline.C:
			c.Stop()
			return fmt.Errorf("cluster: postgres not ready after 60 s; see %s", logPath)
		case <-tick.C:
		}
	}
}

// ready reads line 8 of postmaster.pid, where the server writes "ready" once it
// accepts connections.
func (c *Cluster) ready() bool {
	b, err := os.ReadFile(filepath.Join(c.pgdata, "postmaster.pid"))
	if err != nil {
		return false
	}
	lines := strings.Split(string(b), "\n")
	return len(lines) >= 8 && strings.TrimSpace(lines[7]) == "ready"
}

func tail(path string, n int) string {
	f, err := os.Open(path)
	if err != nil {
		return ""
	}
	defer f.Close()
	var lines []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		lines = append(lines, sc.Text())
		if len(lines) > n {
			lines = lines[1:]
		}
	}
	return strings.Join(lines, "\n")
}

// URL is a connection string for database db over the private Unix socket,
// as the cluster's superuser.
func (c *Cluster) URL(db string) string { return c.URLAs(db, c.cfg.Superuser) }

// URLAs is a connection string for database db as role (the private cluster
// trusts every local connection, so no password is needed).
func (c *Cluster) URLAs(db, role string) string {
	q := url.Values{}
	q.Set("host", c.sockDir)
	q.Set("port", strconv.Itoa(c.cfg.Port))
	q.Set("sslmode", "disable")
	return (&url.URL{Scheme: "postgres", User: url.User(role), Path: "/" + db, RawQuery: q.Encode()}).String()
}

// Dir is the folder that holds the cluster.
func (c *Cluster) Dir() string { return c.cfg.Dir }

// Stop asks the server for a fast shutdown (SIGINT: roll back open transactions,
// close connections, checkpoint) and waits for it; after 30 s it sends SIGQUIT.
// Stopping a stopped server does nothing.
func (c *Cluster) Stop() error {
	if c == nil || c.cmd == nil || c.cmd.Process == nil || c.stopped {
		return nil
	}
	c.stopped = true
	defer func() {
		if c.logFile != nil {
			c.logFile.Close()
		}
		if c.sockDir != c.cfg.Dir {
			os.RemoveAll(c.sockDir)
		}
	}()
	_ = c.cmd.Process.Signal(syscall.SIGINT)
	select {
	case <-c.done:
		return nil
	case <-time.After(30 * time.Second):
		_ = c.cmd.Process.Signal(syscall.SIGQUIT)
		<-c.done
		return errors.New("cluster: server did not stop within 30 s; sent SIGQUIT")
	}
}

// StartStandby starts a hot standby of primary in cfg.Dir: on first use it
// copies the primary with pg_basebackup (streaming the write-ahead log it
// needs, and writing the settings that make it follow the primary by
// streaming replication), then starts it like Start. It serves reads only and
// replays the primary's changes as they stream in. cfg.Port must differ from
// the primary's. Stop and StartStandby again resume it where it was.
func StartStandby(ctx context.Context, primary *Cluster, cfg Config, getenv func(string) string) (*Cluster, error) {
	if cfg.Port == 0 || cfg.Port == primary.cfg.Port {
		return nil, fmt.Errorf("cluster: a standby needs its own port (the primary uses %d)", primary.cfg.Port)
	}
	if cfg.Superuser == "" {
		cfg.Superuser = primary.cfg.Superuser
	}
	dir, err := filepath.Abs(cfg.Dir)
	if err != nil {
		return nil, fmt.Errorf("cluster: data folder %q: %w", cfg.Dir, err)
	}
	pgdata := filepath.Join(dir, "pgdata")
	if _, err := os.Stat(filepath.Join(pgdata, "PG_VERSION")); errors.Is(err, fs.ErrNotExist) {
		if err := mkdirTraversable(filepath.Dir(dir)); err != nil {
			return nil, fmt.Errorf("cluster: create standby folder: %w", err)
		}
		if err := os.Mkdir(dir, 0o700); err != nil && !errors.Is(err, fs.ErrExist) {
			return nil, fmt.Errorf("cluster: create standby folder: %w", err)
		}
		if err := primary.chown(dir); err != nil {
			return nil, err
		}
		// pg_basebackup creates pgdata itself (mode 0700, owned by the
		// server user it runs as).
		cmd := primary.command(ctx, "pg_basebackup", "-D", pgdata, "-h", primary.sockDir, "-p", strconv.Itoa(primary.cfg.Port),
			"-U", primary.cfg.Superuser, "-X", "stream", "-c", "fast", "-R", "--no-sync")
		if out, err := cmd.CombinedOutput(); err != nil {
			return nil, fmt.Errorf("cluster: pg_basebackup of the primary into %s failed: %w\n%s", pgdata, err, out)
		}
	} else if err != nil {
		return nil, fmt.Errorf("cluster: %w", err)
	}
	if _, err := os.Stat(filepath.Join(pgdata, "standby.signal")); err != nil {
		return nil, fmt.Errorf("cluster: %s holds a cluster that is not a standby (no standby.signal)", pgdata)
	}
	return Start(ctx, cfg, getenv)
}

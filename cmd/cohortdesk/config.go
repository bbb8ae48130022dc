package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"net/netip"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"cohortdesk/db"
)

// serverConfig is the configuration shared by serve and demo. Every field comes
// from an environment variable and can be overridden by a flag; the README
// lists them all.
type serverConfig struct {
	Addr            string
	DatabaseURL     string
	MigrateURL      string // the schema owner's connection for migrations; empty: DatabaseURL
	LogLevel        string
	LogFormat       string
	MaxConns        int
	Migrate         bool
	SessionIdle     time.Duration
	SessionLifetime time.Duration
	TrustedProxies  string
	TLSCert         string
	TLSKey          string
	Secret          string
	Workers         int
	ReadURL         string        // a hot standby for pages that only read; "" for none
	ReadMaxLag      time.Duration // reads fall back to the primary beyond this lag
	MetricsAddr     string        // a separate listener for /metrics; "" for none
	MetricsAllow    string        // CIDRs that may read /metrics on the main listener
	Outreach        outreachConfig
}

// bind registers the flags, with defaults taken from the environment.
func (c *serverConfig) bind(fs *flag.FlagSet, getenv func(string) string, defaultAddr string) {
	fs.StringVar(&c.Addr, "addr", envOr(getenv, "COHORTDESK_ADDR", defaultAddr), "address to listen on (env COHORTDESK_ADDR)")
	fs.StringVar(&c.LogLevel, "log-level", envOr(getenv, "COHORTDESK_LOG_LEVEL", "info"), "debug, info, warn or error (env COHORTDESK_LOG_LEVEL)")
	fs.StringVar(&c.LogFormat, "log-format", envOr(getenv, "COHORTDESK_LOG_FORMAT", "text"), "text or json (env COHORTDESK_LOG_FORMAT)")
	fs.IntVar(&c.MaxConns, "db-max-conns", envInt(getenv, "COHORTDESK_DB_MAX_CONNS", 20), "database connections in the pool (env COHORTDESK_DB_MAX_CONNS)")
	fs.StringVar(&c.MigrateURL, "migrate-database-url", getenv(migrateEnv), "PostgreSQL URL of the schema's owner, which runs the migrations and grants the application's role; empty runs them over -database-url (env "+migrateEnv+")")
	fs.BoolVar(&c.Migrate, "migrate", envBool(getenv, "COHORTDESK_MIGRATE", true), "apply pending migrations at start (env COHORTDESK_MIGRATE)")
	fs.DurationVar(&c.SessionIdle, "session-idle", envDuration(getenv, "COHORTDESK_SESSION_IDLE", 30*time.Minute), "sign out after this long without a request (env COHORTDESK_SESSION_IDLE)")
	fs.DurationVar(&c.SessionLifetime, "session-lifetime", envDuration(getenv, "COHORTDESK_SESSION_LIFETIME", 12*time.Hour), "sign out this long after sign-in (env COHORTDESK_SESSION_LIFETIME)")
	fs.StringVar(&c.TrustedProxies, "trusted-proxies", getenv("COHORTDESK_TRUSTED_PROXIES"), "comma-separated CIDRs of reverse proxies whose X-Forwarded-For is believed; when set, cookies are marked Secure (env COHORTDESK_TRUSTED_PROXIES)")
	fs.StringVar(&c.TLSCert, "tls-cert", getenv("COHORTDESK_TLS_CERT"), "serve HTTPS with this certificate file (env COHORTDESK_TLS_CERT)")
	fs.StringVar(&c.TLSKey, "tls-key", getenv("COHORTDESK_TLS_KEY"), "key file of -tls-cert (env COHORTDESK_TLS_KEY)")
	fs.IntVar(&c.Workers, "workers", envInt(getenv, "COHORTDESK_WORKERS", 1), "background job workers in this instance (screening after imports, threshold sweeps); 0 leaves the queue to other instances (env COHORTDESK_WORKERS)")
	c.Outreach.bind(fs, getenv)
	fs.StringVar(&c.Secret, "secret", getenv("COHORTDESK_SECRET"), "deployment secret keying the pseudonymous referral codes, 32+ characters (env COHORTDESK_SECRET)")
	fs.StringVar(&c.ReadURL, "database-read-url", getenv("DATABASE_READ_URL"), "PostgreSQL URL of a hot standby of DATABASE_URL: pages that only read are read there (env DATABASE_READ_URL)")
	fs.DurationVar(&c.ReadMaxLag, "read-max-lag", envDuration(getenv, "COHORTDESK_READ_MAX_LAG", 2*time.Second), "reads fall back to the primary while the standby lags more than this (env COHORTDESK_READ_MAX_LAG)")
	fs.StringVar(&c.MetricsAddr, "metrics-addr", getenv("COHORTDESK_METRICS_ADDR"), "serve /metrics (Prometheus text format) on this separate address, e.g. 127.0.0.1:9090 (env COHORTDESK_METRICS_ADDR)")
	fs.StringVar(&c.MetricsAllow, "metrics-allow", getenv("COHORTDESK_METRICS_ALLOW"), "comma-separated CIDRs that may read /metrics on the main address; empty: nobody (env COHORTDESK_METRICS_ALLOW)")
}

// proxies parses TrustedProxies.
func (c *serverConfig) proxies() ([]netip.Prefix, error) {
	return parseCIDRs("-trusted-proxies", c.TrustedProxies)
}

// metricsAllowed parses MetricsAllow.
func (c *serverConfig) metricsAllowed() ([]netip.Prefix, error) {
	return parseCIDRs("-metrics-allow", c.MetricsAllow)
}

// parseCIDRs reads comma-separated CIDRs (a bare address is one host).
func parseCIDRs(flag, list string) ([]netip.Prefix, error) {
	var out []netip.Prefix
	for _, p := range strings.Split(list, ",") {
		p = strings.TrimSpace(p)
		if p == "" {
			continue
		}
		if !strings.Contains(p, "/") {
			if a, err := netip.ParseAddr(p); err == nil {
				p = netip.PrefixFrom(a, a.BitLen()).String()
			}
		}
		pref, err := netip.ParsePrefix(p)
		if err != nil {
			return nil, fmt.Errorf("config: %s: %q is not a CIDR such as 10.0.0.0/8", flag, p)
		}
		out = append(out, pref)
	}
	return out, nil
}

func (c *serverConfig) validate() error {
	if c.Addr == "" {
		return fmt.Errorf("config: -addr is empty")
	}
	if c.MaxConns < 2 || c.MaxConns > 500 {
		return fmt.Errorf("config: -db-max-conns %d: want 2 to 500", c.MaxConns)
	}
	if _, err := parseLevel(c.LogLevel); err != nil {
		return err
	}
	if c.LogFormat != "text" && c.LogFormat != "json" {
		return fmt.Errorf("config: -log-format %q: want text or json", c.LogFormat)
	}
	if c.SessionIdle < time.Minute || c.SessionLifetime < c.SessionIdle {
		return fmt.Errorf("config: sessions: idle %s must be at least 1m and lifetime %s at least the idle time", c.SessionIdle, c.SessionLifetime)
	}
	if (c.TLSCert == "") != (c.TLSKey == "") {
		return fmt.Errorf("config: give both -tls-cert and -tls-key, or neither")
	}
	if c.Secret != "" && len(c.Secret) < 32 {
		return fmt.Errorf("config: -secret is %d characters; use at least 32 random characters", len(c.Secret))
	}
	if c.Workers < 0 || c.Workers > 64 {
		return fmt.Errorf("config: -workers %d: want 0 to 64", c.Workers)
	}
	if _, err := c.proxies(); err != nil {
		return err
	}
	if _, err := c.metricsAllowed(); err != nil {
		return err
	}
	if c.ReadMaxLag < 100*time.Millisecond || c.ReadMaxLag > time.Hour {
		return fmt.Errorf("config: -read-max-lag %s: want 100ms to 1h", c.ReadMaxLag)
	}
	if c.MetricsAddr != "" && c.MetricsAddr == c.Addr {
		return fmt.Errorf("config: -metrics-addr is the main address; leave it empty and use -metrics-allow instead")
	}
	return c.Outreach.validate()
}

func (c *serverConfig) logger(w io.Writer) *slog.Logger {
	lvl, _ := parseLevel(c.LogLevel)
	o := &slog.HandlerOptions{Level: lvl}
	if c.LogFormat == "json" {
		return slog.New(slog.NewJSONHandler(w, o))
	}
	return slog.New(slog.NewTextHandler(w, o))
}

func parseLevel(s string) (slog.Level, error) {
	var l slog.Level
	if err := l.UnmarshalText([]byte(s)); err != nil {
		return 0, fmt.Errorf("config: log level %q: want debug, info, warn or error", s)
	}
	return l, nil
}

func envOr(getenv func(string) string, key, def string) string {
	if v := getenv(key); v != "" {
		return v
	}
	return def
}

func envInt(getenv func(string) string, key string, def int) int {
	if v := getenv(key); v != "" {
		if n, err := strconv.Atoi(v); err == nil {
			return n
		}
	}
	return def
}

func envBool(getenv func(string) string, key string, def bool) bool {
	if v := getenv(key); v != "" {
		if b, err := strconv.ParseBool(v); err == nil {
			return b
		}
	}
	return def
}

func envDuration(getenv func(string) string, key string, def time.Duration) time.Duration {
	if v := getenv(key); v != "" {
		if d, err := time.ParseDuration(v); err == nil {
			return d
		}
	}
	return def
}

// defaultDataDir is where the demo keeps its private cluster. Root gets a folder
// under /var/lib, which the unprivileged server user can reach; /root (mode
// 0700) would stop it.
func defaultDataDir(getenv func(string) string) string {
	if v := getenv("COHORTDESK_DATA"); v != "" {
		return v
	}
	if os.Geteuid() == 0 {
		return "/var/lib/cohortdesk"
	}
	if x := getenv("XDG_DATA_HOME"); x != "" {
		return filepath.Join(x, "cohortdesk")
	}
	if h := getenv("HOME"); h != "" {
		return filepath.Join(h, ".local", "share", "cohortdesk")
	}
	return filepath.Join(os.TempDir(), "cohortdesk-"+strconv.Itoa(os.Getuid()))
}

// redactURL hides a password in a database URL for logs.
func redactURL(u string) string {
	at := strings.LastIndex(u, "@")
	scheme := strings.Index(u, "://")
	if at < 0 || scheme < 0 {
		return u
	}
	userinfo := u[scheme+3 : at]
	if name, _, ok := strings.Cut(userinfo, ":"); ok {
		return u[:scheme+3] + name + ":***" + u[at:]
	}
	return u
}

// openStore connects the tools (import, user, screen) to DATABASE_URL and
// brings the schema up to date, as serve would (as the owner of
// COHORTDESK_MIGRATE_DATABASE_URL when set). close releases the pool.
func openStore(ctx context.Context, getenv func(string) string, command, url string, conns int32) (store *db.Store, close func(), err error) {
	if url == "" {
		return nil, nil, fmt.Errorf("%s: DATABASE_URL is not set (for the demo's database, run the demo and use the DATABASE_URL it prints)", command)
	}
	pool, err := db.Open(ctx, url, conns)
	if err != nil {
		return nil, nil, err
	}
	if _, err := migrateAs(ctx, getenv(migrateEnv), pool); err != nil {
		pool.Close()
		return nil, nil, err
	}
	return db.New(pool, nil), pool.Close, nil
}

package web

import (
	"bytes"
	"context"
	"io"
	"mime/multipart"
	"net/http"
	"net/http/cookiejar"
	"net/http/httptest"
	"net/url"
	"strconv"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// testPassword is every test account's password.
const testPassword = "test password 1234"

// testSecret keys the test server's referral codes.
const testSecret = "web test deployment secret, fixed for the tests"

// app is a running server on a fresh database with one account per role.
type app struct {
	t     *testing.T
	ts    *httptest.Server
	store *db.Store
	srv   *Server
	users map[cohort.Role]db.User
}

func newApp(t *testing.T) *app {
	t.Helper()
	pool := dbtest.Pool(t)
	store := db.New(pool, nil)
	srv := New(Config{Store: store, Pool: pool, Password: credential.TestParams, Secret: []byte(testSecret)})
	ts := httptest.NewServer(srv.Handler())
	t.Cleanup(ts.Close)
	a := &app{t: t, ts: ts, store: store, srv: srv, users: map[cohort.Role]db.User{}}
	a.addRoleUsers()
	return a
}

// addRoleUsers creates the test account of every role (role@example.org,
// password testPassword).
func (a *app) addRoleUsers() {
	a.t.Helper()
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		a.t.Fatal(err)
	}
	for _, r := range cohort.Roles {
		u, err := a.store.CreateUser(context.Background(), cohort.System,
			db.NewUser{Email: string(r) + "@example.org", Name: "Test " + r.Label(), Role: r, PasswordHash: hash})
		if err != nil {
			a.t.Fatal(err)
		}
		a.users[r] = u
	}
}

// client is a browser-like client with its own cookie jar that does not follow
// redirects, so tests see them.
func (a *app) client() *http.Client {
	jar, _ := cookiejar.New(nil)
	return &http.Client{Jar: jar, CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
}

// signIn returns a client signed in as role.
func (a *app) signIn(role cohort.Role) *http.Client {
	a.t.Helper()
	c := a.client()
	res := a.postForm(c, "/signin", url.Values{"email": {string(role) + "@example.org"}, "password": {testPassword}})
	if res.StatusCode != http.StatusSeeOther {
		a.t.Fatalf("sign in as %s: status %d", role, res.StatusCode)
	}
	return c
}

func (a *app) get(c *http.Client, path string) (*http.Response, string) {
	a.t.Helper()
	res, err := c.Get(a.ts.URL + path)
	if err != nil {
		a.t.Fatal(err)
	}
	defer res.Body.Close()
	b, _ := io.ReadAll(res.Body)
	return res, string(b)
}

func (a *app) postForm(c *http.Client, path string, v url.Values) *http.Response {
	a.t.Helper()
	res, err := c.PostForm(a.ts.URL+path, v)
	if err != nil {
		a.t.Fatal(err)
	}
	io.Copy(io.Discard, res.Body)
	res.Body.Close()
	return res
}

func (a *app) postFormBody(c *http.Client, path string, v url.Values) (*http.Response, string) {
	a.t.Helper()
	res, err := c.PostForm(a.ts.URL+path, v)
	if err != nil {
		a.t.Fatal(err)
	}
	defer res.Body.Close()
	b, _ := io.ReadAll(res.Body)
	return res, string(b)
}

func (a *app) exec(sql string, args ...any) {
	a.t.Helper()
	if _, err := a.store.Pool().Exec(context.Background(), sql, args...); err != nil {
		a.t.Fatalf("exec %s: %v", strings.SplitN(sql, "\n", 2)[0], err)
	}
	a.drainFigures()
}

// drainFigures computes the kept figures a write by bare SQL left waiting, as
// the server's background pass does (db.Store.DrainFigures).
func (a *app) drainFigures() {
	a.t.Helper()
	for {
		n, err := a.store.DrainFigures(context.Background(), 1000)
		if err != nil {
			a.t.Fatalf("drain figures: %v", err)
		}
		if n == 0 {
			return
		}
	}
}

func strconvFormat(n int64) string { return strconv.FormatInt(n, 10) }

// postFile posts a multipart form as a browser does: the fields (in order of
// the keys given), then one file under fileField.
func (a *app) postFile(c *http.Client, path string, fields [][2]string, fileField, name string, data []byte) (*http.Response, string) {
	a.t.Helper()
	return a.postMultipart(c, path, fields, fileField, []namedFile{{name, data}})
}

// namedFile is one file of a multipart form.
type namedFile struct {
	name string
	data []byte
}

// postMultipart posts a multipart form with fields and any number of files
// in one file field, as a browser sends a multiple file choice.
func (a *app) postMultipart(c *http.Client, path string, fields [][2]string, fileField string, files []namedFile) (*http.Response, string) {
	a.t.Helper()
	var body bytes.Buffer
	mw := multipart.NewWriter(&body)
	for _, kv := range fields {
		mw.WriteField(kv[0], kv[1])
	}
	for _, f := range files {
		fw, err := mw.CreateFormFile(fileField, f.name)
		if err != nil {
			a.t.Fatal(err)
		}
		fw.Write(f.data)
	}
	mw.Close()
	req, _ := http.NewRequest("POST", a.ts.URL+path, &body)
	req.Header.Set("Content-Type", mw.FormDataContentType())
	res, err := c.Do(req)
	if err != nil {
		a.t.Fatal(err)
	}
	defer res.Body.Close()
	b, _ := io.ReadAll(res.Body)
	return res, string(b)
}

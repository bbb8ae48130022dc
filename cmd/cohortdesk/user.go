package main

import (
	"bufio"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
)

// runUser manages staff accounts from the command line: the way to create the
// first administrator, and a way back in when every administrator is locked out.
func runUser(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("user", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	url := fs.String("database-url", e.getenv("DATABASE_URL"), "PostgreSQL URL (env DATABASE_URL)")
	email := fs.String("email", "", "the account's e-mail address (its sign-in name)")
	name := fs.String("name", "", "the person's name (add)")
	roles := make([]string, len(cohort.Roles))
	for i, r := range cohort.Roles {
		roles[i] = string(r)
	}
	role := fs.String("role", string(cohort.Admin), "the account's role: "+strings.Join(roles, ", ")+" (add)")
	stdin := fs.Bool("password-stdin", false, "read the password from standard input instead of generating one")
	fs.Usage = func() {
		fmt.Fprintln(e.stderr, "usage: cohortdesk user [flags] add|reset-password|list")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		fs.Usage()
		return errors.New("user: name one action: add, reset-password or list")
	}
	store, closeDB, err := openStore(ctx, e.getenv, "user", *url, 2)
	if err != nil {
		return err
	}
	defer closeDB()
	actor := cohort.Actor{Name: "command line (" + osUser() + ")"}

	// password is the new password (generated, or read from standard input)
	// and its hash; generated says whether to print it.
	password := func() (pw, hash string, generated bool, err error) {
		if !*stdin {
			pw, generated = credential.RandomPassword(16), true
		} else {
			pw, err = bufio.NewReader(os.Stdin).ReadString('\n')
			if err != nil && !errors.Is(err, io.EOF) {
				return "", "", false, err
			}
			pw = strings.TrimRight(pw, "\r\n")
			if err := credential.CheckPolicy(pw); err != nil {
				return "", "", false, fmt.Errorf("user: password: %w", err)
			}
		}
		hash, err = credential.Hash(pw, credential.DefaultParams)
		return pw, hash, generated, err
	}

	switch fs.Arg(0) {
	case "add":
		r, err := cohort.ParseRole(*role)
		if err != nil {
			return fmt.Errorf("user: %w", err)
		}
		pw, hash, generated, err := password()
		if err != nil {
			return err
		}
		u, err := store.CreateUser(ctx, actor, db.NewUser{Email: *email, Name: *name, Role: r, PasswordHash: hash, MustChangePassword: generated})
		if err != nil {
			return fmt.Errorf("user: %w", err)
		}
		fmt.Fprintf(e.stdout, "created %s (%s), id %d\n", u.Email, u.Role.Label(), u.ID)
		if generated {
			fmt.Fprintf(e.stdout, "password: %s\n", pw)
		}
		return nil
	case "reset-password":
		u, err := store.UserForSignIn(ctx, *email)
		if err != nil {
			return fmt.Errorf("user: no account %q: %w", *email, err)
		}
		pw, hash, generated, err := password()
		if err != nil {
			return err
		}
		if err := store.SetPassword(ctx, actor, u.ID, hash); err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "password reset for %s\n", u.Email)
		if generated {
			fmt.Fprintf(e.stdout, "password: %s\n", pw)
		}
		return nil
	case "list":
		us, err := store.Users(ctx)
		if err != nil {
			return err
		}
		for _, u := range us {
			state := "active"
			if !u.Active {
				state = "deactivated"
			}
			fmt.Fprintf(e.stdout, "%4d  %-32s %-14s %-11s %s\n", u.ID, u.Email, u.Role, state, u.Name)
		}
		return nil
	}
	return fmt.Errorf("user: unknown action %q", fs.Arg(0))
}

func osUser() string {
	if u := os.Getenv("USER"); u != "" {
		return u
	}
	return fmt.Sprintf("uid %d", os.Getuid())
}

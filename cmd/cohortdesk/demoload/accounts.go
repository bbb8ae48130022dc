package demoload

import (
	"context"
	"errors"

	"cohortdesk/cohort/credential"
	"cohortdesk/db"
)

// LoaderName is the actor the loader's changes are audited under.
const LoaderName = "demo loader"

// SignInAccounts are the accounts the demo may advertise with its password:
// those the loader created, still active, whose password is still password
// (nobody changed or reset it). Accounts an administrator added and
// deactivated ones are left out.
func SignInAccounts(ctx context.Context, store *db.Store, password string) ([]db.User, error) {
	own, err := store.UsersCreatedBy(ctx, LoaderName)
	if err != nil {
		return nil, err
	}
	users, err := store.Users(ctx)
	if err != nil {
		return nil, err
	}
	var out []db.User
	for _, u := range users {
		if !u.Active || !own[u.ID] {
			continue
		}
		full, err := store.UserForSignIn(ctx, u.Email)
		if err != nil {
			return nil, err
		}
		ok, err := credential.Verify(password, full.PasswordHash)
		if err != nil && !errors.Is(err, credential.ErrMalformedHash) {
			return nil, err
		}
		if ok {
			out = append(out, u)
		}
	}
	return out, nil
}

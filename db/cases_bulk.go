package db

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"slices"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// CaseRef names a case and the version the person saw, for bulk actions.
type CaseRef struct {
	ID      int64
	Version int
}

// maxBulk bounds one bulk request; a page of the case list holds fewer.
const maxBulk = 500

// bulk applies one edit to many cases in one transaction: all or nothing. The
// cases are locked in id order so two bulk requests cannot deadlock.
func (s *Store) bulk(ctx context.Context, a cohort.Actor, refs []CaseRef, edit func() caseEdit) (int, error) {
	refs, err := bulkRefs(refs)
	if err != nil {
		return 0, err
	}
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		for _, r := range refs {
			if _, err := s.editCase(ctx, tx, a, r.ID, r.Version, edit()); err != nil {
				return bulkErr(r.ID, err)
			}
		}
		return nil
	})
	if err != nil {
		return 0, mapCaseErr("bulk case edit", err)
	}
	return len(refs), nil
}

// bulkRefs checks a selection (at least one case, at most maxBulk) and
// returns it in id order without repeats, the order bulk edits lock in.
func bulkRefs(refs []CaseRef) ([]CaseRef, error) {
	if len(refs) == 0 {
		return nil, &cohort.ValidationError{Fields: map[string]string{"cases": "select at least one case"}}
	}
	if len(refs) > maxBulk {
		return nil, &cohort.ValidationError{Fields: map[string]string{"cases": fmt.Sprintf("select at most %d cases at once", maxBulk)}}
	}
	refs = slices.Clone(refs)
	slices.SortFunc(refs, func(x, y CaseRef) int { return cmp.Compare(x.ID, y.ID) })
	return slices.CompactFunc(refs, func(x, y CaseRef) bool { return x.ID == y.ID }), nil
}

// bulkErr names the case an error in a bulk request is about.
func bulkErr(id int64, err error) error {
	prefix := fmt.Sprintf("case %d: ", id)
	var ve *cohort.ValidationError
	var ce *cohort.ConflictError
	switch {
	case errors.As(err, &ce):
		return &cohort.ConflictError{Message: prefix + ce.Message + " Nothing was changed.", Changes: ce.Changes}
	case errors.As(err, &ve):
		out := &cohort.ValidationError{}
		for f, m := range ve.Fields {
			out.Add(f, prefix+m)
		}
		out.Add("cases", prefix+ve.Error())
		return out
	case errors.Is(err, pgx.ErrNoRows):
		return &cohort.ValidationError{Fields: map[string]string{"cases": prefix + "no such case"}}
	}
	return err
}

// AssignCases gives many cases to one person (ownerID 0: to nobody), each
// change audited, all or nothing.
func (s *Store) AssignCases(ctx context.Context, a cohort.Actor, refs []CaseRef, ownerID int64) (int, error) {
	name := s.userName(ctx, ownerID)
	return s.bulk(ctx, a, refs, func() caseEdit { return s.assignEdit(name, ownerID, true) })
}

// LogLetters records "letter sent" on many cases, the attempt followup.Letter
// stands for. Each is audited; all or nothing.
func (s *Store) LogLetters(ctx context.Context, a cohort.Actor, refs []CaseRef, note string) (int, error) {
	return s.bulk(ctx, a, refs, func() caseEdit { return s.attemptEdit(a, followup.Letter(note), true) })
}

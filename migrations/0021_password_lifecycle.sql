-- +goose Up
-- Password lifecycle: a password an administrator set (a new account's first
-- password, a reset) must be changed by its owner at the next sign-in.
ALTER TABLE users
    ADD COLUMN must_change_password boolean NOT NULL DEFAULT false,
    ADD COLUMN password_changed_at  timestamptz;

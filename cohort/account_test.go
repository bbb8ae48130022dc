package cohort

import (
	"strings"
	"testing"
)

func TestCheckAccount(t *testing.T) {
	if err := CheckAccount("a@example.org", "Ann Teller", Coordinator); err != nil {
		t.Fatal(err)
	}
	err := CheckAccount("not an address", " ", Role("boss"))
	ve, ok := err.(*ValidationError)
	if !ok || ve.Fields["email"] == "" || ve.Fields["name"] != "enter the person's name" || ve.Fields["role"] != "choose a role" {
		t.Fatalf("bad account: %v", err)
	}
	if err, _ := CheckAccount("a@example.org", strings.Repeat("n", 121), Admin).(*ValidationError); err == nil || err.Fields["name"] != "use at most 120 characters" {
		t.Fatalf("long name: %v", err)
	}
}

func TestCheckAccountChange(t *testing.T) {
	for _, c := range []struct {
		role         Role
		active, self bool
		refused      bool
	}{
		{Coordinator, true, false, false},
		{Coordinator, false, false, false}, // deactivating someone else
		{Admin, true, true, false},
		{Coordinator, true, true, true}, // demoting oneself
		{Admin, false, true, true},      // deactivating oneself
	} {
		err := CheckAccountChange("Ann", c.role, c.active, c.self)
		if (err != nil) != c.refused {
			t.Errorf("%+v: %v", c, err)
		}
		if ve, ok := err.(*ValidationError); c.refused && (!ok || !strings.Contains(ve.Fields["role"], "ask another administrator")) {
			t.Errorf("%+v: %v", c, err)
		}
	}
}

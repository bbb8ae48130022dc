package views

import (
	"strconv"
	"strings"

	"github.com/a-h/templ"
)

// fieldState is the accessibility state of the form control of the field
// name: aria-invalid, and aria-describedby naming the help texts given
// (ids) and, when the field was refused, the message the field shows
// beside it (id name-error, as field and the forms' own messages write
// it). A screen reader then reads why the value was refused together with
// the control, not only that it was.
func fieldState(errs map[string]string, name string, hints ...string) templ.Attributes {
	ids := append([]string(nil), hints...)
	_, refused := errs[name]
	if refused {
		ids = append(ids, name+"-error")
	}
	a := templ.Attributes{"aria-invalid": strconv.FormatBool(refused)}
	if len(ids) > 0 {
		a["aria-describedby"] = strings.Join(ids, " ")
	}
	return a
}

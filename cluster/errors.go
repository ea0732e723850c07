package cluster

import (
	"strings"
)

// FieldError says that one field of a cluster is wrong, and why. Path names
// the field as it is spelled in the cluster file (protojson names, with
// [index] for list elements), for example
//
//	bonds[3].b: unknown site "t9"
//	sites[2].spin: 0.7 is not a positive multiple of 1/2
//
// A Path that names a list element without a field ("bonds[0]") blames the
// element as a whole.
type FieldError struct {
	Path   string
	Reason string
}

// Error returns Path + ": " + Reason.
func (e *FieldError) Error() string {
	if e.Path == "" {
		return e.Reason
	}
	return e.Path + ": " + e.Reason
}

// FieldErrors is every problem found in one cluster, in the order of the
// file. FromProto and Load return a FieldErrors (never empty) when a cluster
// is refused; errors.As with a *FieldError finds its first entry. A list
// longer than MaxFieldErrors is cut there, and one last entry with an empty
// Path says how many more problems there were.
type FieldErrors []*FieldError

// Error joins the entries with "; ".
func (es FieldErrors) Error() string {
	parts := make([]string, len(es))
	for i, e := range es {
		parts[i] = e.Error()
	}
	return strings.Join(parts, "; ")
}

// Unwrap returns the entries, so that errors.As and errors.Is see each one.
func (es FieldErrors) Unwrap() []error {
	out := make([]error, len(es))
	for i, e := range es {
		out[i] = e
	}
	return out
}

// fileError is a cluster file that is not a Cluster message at all: JSON
// syntax, an unknown field, a wrong type, a file too large.
type fileError struct {
	err error
}

func (e *fileError) Error() string {
	msg := e.err.Error()
	// protobuf prefixes its messages with "proto:" and then either a space or,
	// at random, a non-breaking space; neither helps a user.
	if rest, ok := strings.CutPrefix(msg, "proto:"); ok {
		msg = strings.TrimLeft(rest, " \u00a0")
	}
	return "cluster file: " + msg
}

func (e *fileError) Unwrap() error { return e.err }

package cluster

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
)

// FuzzLoad checks that Load never panics, that every refusal is either a
// file error or a non-empty FieldErrors, and that every accepted cluster
// round-trips: through ToProto and FromProto, and through the JSON file.
func FuzzLoad(f *testing.F) {
	// Valid clusters: the test data (the FORMAT.md example, which is refused,
	// is one of them), the builders and a model with every field.
	files, _ := filepath.Glob(filepath.Join("testdata", "*.json"))
	for _, name := range files {
		data, err := os.ReadFile(name)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	for _, m := range append(builtModels(), fullModel()) {
		data, err := protojson.Marshal(m.ToProto())
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	// Broken clusters: every case of the table.
	for _, tc := range badClusters {
		if len(tc.json) < 4096 {
			f.Add([]byte(tc.json))
		}
	}
	f.Add([]byte(`{"sites": [{"label": "a", "spin": 1, "singleIon": 0.5}, {"label": "b", "spin": 1, "singleIon": 0.5}], "bonds": [{"a": "a", "b": "b", "dm": [1, 2, 3]}], "symmetries": [{"permutation": ["b", "a"]}]}`))

	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := Load(bytes.NewReader(data))
		if err != nil {
			if m != nil {
				t.Fatal("a model returned with an error")
			}
			var list FieldErrors
			if errors.As(err, &list) {
				if len(list) == 0 {
					t.Fatal("empty FieldErrors")
				}
				for _, e := range list {
					if e.Reason == "" {
						t.Fatalf("an error without a reason: %v", err)
					}
				}
			} else if !strings.HasPrefix(err.Error(), "cluster file: ") {
				t.Fatalf("error %q is neither a FieldErrors nor a file error", err)
			}
			return
		}
		if _, ok := m.Dimension(); !ok {
			t.Fatal("an accepted model whose dimension does not fit")
		}
		for _, s := range m.Symmetries {
			if err := m.CheckPermutation(s.Perm); err != nil {
				t.Fatalf("an accepted symmetry fails: %v", err)
			}
		}
		again, err := FromProto(m.ToProto())
		if err != nil {
			t.Fatalf("FromProto(ToProto) refused: %v", err)
		}
		if !again.Equal(m) {
			t.Fatalf("FromProto(ToProto) differs:\n got %+v\nwant %+v", again, m)
		}
		out, err := protojson.Marshal(m.ToProto())
		if err != nil {
			t.Fatal(err)
		}
		fromFile, err := Load(bytes.NewReader(out))
		if err != nil {
			t.Fatalf("the written file is refused: %v\n%s", err, out)
		}
		if !fromFile.Equal(m) {
			t.Fatalf("the written file differs")
		}
	})
}

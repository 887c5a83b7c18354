package traffic

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

func TestReadRenameFile(t *testing.T) {
	for _, tc := range []struct {
		name string
		text string
		want map[string]string
	}{
		{"header", "model_name,column_name\nprice,nightly_price\nstars,review_stars\n", map[string]string{"price": "nightly_price", "stars": "review_stars"}},
		{"no-header", "price,nightly_price\n", map[string]string{"price": "nightly_price"}},
		{"header-case-and-spaces", " Model_Name , COLUMN_NAME \r\nprice , nightly_price\r\n\r\n", map[string]string{"price": "nightly_price"}},
		{"quoted-comma", "\"price, per night\",nightly_price\n", map[string]string{"price, per night": "nightly_price"}},
		{"empty", "", map[string]string{}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "rename.csv")
			os.WriteFile(path, []byte(tc.text), 0o644)
			got, err := ReadRenameFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(got, tc.want) {
				t.Errorf("got %v, want %v", got, tc.want)
			}
		})
	}
}

func TestReadRenameFileErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		text string
		line string
	}{
		{"one-field", "model_name,column_name\nprice\n", "line 2"},
		{"three-fields", "price,nightly_price,extra\n", "line 1"},
		{"empty-model-name", "stars,review_stars\n,nightly_price\n", "line 2"},
		{"empty-column-name", "price,\n", "line 1"},
		{"duplicate", "price,a\nstars,b\nprice,c\n", "line 3"},
		{"bad-quote", "price,\"nightly\n", "line 1"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "rename.csv")
			os.WriteFile(path, []byte(tc.text), 0o644)
			_, err := ReadRenameFile(path)
			if !errors.Is(err, ErrRenameFile) {
				t.Fatalf("err = %v, want ErrRenameFile", err)
			}
			if msg := err.Error(); !strings.Contains(msg, path) || !strings.Contains(msg, tc.line) || strings.Contains(msg, "\n") {
				t.Errorf("error %q should name %s and %s on one line", msg, path, tc.line)
			}
		})
	}
	t.Run("missing-file", func(t *testing.T) {
		path := filepath.Join(t.TempDir(), "none.csv")
		_, err := ReadRenameFile(path)
		if !errors.Is(err, os.ErrNotExist) || !strings.Contains(err.Error(), path) {
			t.Errorf("err = %v, want not-exist naming the file", err)
		}
	})
}

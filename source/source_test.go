package source

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

func TestDetectSawmill(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("..", "golden", "testdata", "edge-softmax", "model.json"))
	require.NoError(t, err)
	f, err := Detect(data, "model.json")
	require.NoError(t, err)
	require.Equal(t, "sawmill", f.Name)

	r, err := Decode(data, "model.json", "", Options{})
	require.NoError(t, err)
	require.Equal(t, "sawmill", r.Format)
	require.NotEmpty(t, r.Forest.Trees)
}

func TestDetectRefuses(t *testing.T) {
	for _, in := range []string{"", "hello", "[1,2]", "{\"a\": 1}", "{\x69\x04name"} {
		_, err := Detect([]byte(in), "x.bin")
		require.Error(t, err, "%q", in)
		require.True(t, strings.HasPrefix(err.Error(), "x.bin: not a model file"), err.Error())
	}
}

func TestRenames(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("..", "golden", "testdata", "edge-softmax", "model.json"))
	require.NoError(t, err)
	r, err := Decode(data, "model.json", "sawmill", Options{})
	require.NoError(t, err)
	names := make([]string, len(r.Forest.Features))
	for i := range names {
		names[i] = "f" + string(rune('a'+i))
	}
	r2, err := Decode(data, "model.json", "", Options{Features: names})
	require.NoError(t, err)
	require.Equal(t, names, r2.Forest.Features)

	_, err = Decode(data, "model.json", "", Options{Features: names[:1]})
	if len(names) > 1 {
		require.ErrorContains(t, err, "--features names 1 features")
	}
	_, err = Decode(data, "model.json", "nope", Options{})
	require.ErrorContains(t, err, `unknown model format "nope"`)
}

package ctarget

import (
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// TestThreadsFiles: Options.Threads adds NAME_threads.h and NAME_threads.c
// and changes neither NAME.h nor NAME.c, so a build without threads is the
// same code. That the threaded path scores bit for bit like NAME_predict is
// checked by verify's C driver on every golden case.
func TestThreadsFiles(t *testing.T) {
	f, err := forest.ReadFile(filepath.Join("..", "..", "golden", "testdata", "sklearn-wine", "model.json"))
	require.NoError(t, err)
	for _, fl := range []bool{false, true} {
		p, _, err := compile.Compile(f, compile.Options{SingleInputs: fl})
		require.NoError(t, err)
		for _, layout := range []string{"nested", "table"} {
			plain, err := Emit(p, Options{Name: "wine", Layout: layout, Float: fl})
			require.NoError(t, err)
			withThreads, err := Emit(p, Options{Name: "wine", Layout: layout, Float: fl, Threads: true})
			require.NoError(t, err)
			require.Len(t, plain, 2)
			require.Len(t, withThreads, 4)
			require.Equal(t, plain, withThreads[:2], "NAME.h and NAME.c must not depend on Threads")
			require.Equal(t, "wine_threads.h", withThreads[2].Name)
			require.Equal(t, "wine_threads.c", withThreads[3].Name)
			ft := map[bool]string{false: "double", true: "float"}[fl]
			require.Contains(t, string(withThreads[2].Data), "int wine_predict_batch_threads(const "+ft+" *x, size_t n, "+ft+" *out, int nthreads);")
			require.Contains(t, string(withThreads[2].Data), "#define WINE_THREADS_MIN_ROWS 256")
			src := string(withThreads[3].Data)
			require.Contains(t, src, "#include <pthread.h>")
			require.Contains(t, src, "wine_predict_batch(p->x, p->n, p->out);")
			require.False(t, strings.Contains(string(plain[1].Data), "pthread"), "NAME.c must not use threads")
		}
	}
}

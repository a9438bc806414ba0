package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/source"
)

type importFlags struct {
	output     string
	from       string
	features   []string
	classes    []string
	iterations int
	missing    string
	force      bool
}

func newImportCmd() *cobra.Command {
	var fl importFlags
	var formats []string
	for _, f := range source.Formats() {
		formats = append(formats, fmt.Sprintf("  %-16s %s", f.Name, f.Describe))
	}
	c := &cobra.Command{
		Use:   "import SOURCE -o MODEL.json",
		Short: "Convert a model saved by a training library into sawmill's model file",
		Long: `Read a model file saved by a training library and write it as sawmill's
model file (format version 2 where the model needs it). The format is
detected from the file's content; --from forces one. The conversion is
exact: the written model scores every row as the library does (its raw
margins bit for bit), or the import fails naming what it cannot say.

Every other command (inspect, predict, compile, verify) also reads these
files directly; import writes the converted model once, for review and
version control.

Formats read:
` + strings.Join(formats, "\n"),
		Example: `  sawmill import model.json -o pump-health.json
  sawmill import model.ubj -o pump-health.json --features vibration_rms,bearing_temp_c
  sawmill import model.json -o pump-health.json --iterations 200 --missing -999`,
		Args: exactArgs(1, "one model file"),
		RunE: func(c *cobra.Command, args []string) error {
			return runImport(c, args[0], &fl)
		},
	}
	f := c.Flags()
	f.StringVarP(&fl.output, "output", "o", "", "the sawmill model file to write (required)")
	f.StringVar(&fl.from, "from", "", "the source's format, instead of detecting it: "+strings.Join(source.Names(), ", "))
	f.StringSliceVar(&fl.features, "features", nil, "feature names, comma-separated, in input order (when the file has none, or to rename)")
	f.StringSliceVar(&fl.classes, "classes", nil, "class labels, comma-separated, in output order")
	f.IntVar(&fl.iterations, "iterations", 0, "keep the first N boosting rounds (default: the file's best iteration, or all)")
	f.StringVar(&fl.missing, "missing", "", "a number that also means missing in the inputs (as in XGBoost's missing=), e.g. 0 or -999")
	f.BoolVar(&fl.force, "force", false, "overwrite MODEL.json if it exists")
	return c
}

func runImport(c *cobra.Command, src string, fl *importFlags) error {
	usage := func(format string, a ...any) error {
		return usageError{fmt.Errorf("sawmill import: "+format+"\nhint: see 'sawmill import -h'", a...)}
	}
	if fl.output == "" {
		return usage("-o is required: name the model file to write")
	}
	if fl.iterations < 0 {
		return usage("--iterations %d: must be at least 1", fl.iterations)
	}
	o := source.Options{Features: fl.features, Classes: fl.classes, Iterations: fl.iterations}
	if fl.missing != "" {
		v, err := strconv.ParseFloat(fl.missing, 64)
		if err != nil {
			return usage("--missing %q is not a number", fl.missing)
		}
		o.Missing = &v
	}
	if same, _ := sameFile(src, fl.output); same {
		return fmt.Errorf("%s: is the source; not writing over an input\nhint: choose another -o file", fl.output)
	}
	if _, err := os.Stat(fl.output); err == nil && !fl.force {
		return fmt.Errorf("%s: exists; not overwriting it\nhint: choose another -o file, or pass --force", fl.output)
	}
	if fi, err := os.Stat(filepath.Dir(fl.output)); err != nil || !fi.IsDir() {
		return fmt.Errorf("%s: the folder to write the model in does not exist", fl.output)
	}
	r, err := readSource(src, fl.from, o)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := r.Forest.Encode(&buf); err != nil {
		return fmt.Errorf("BUG: an imported model does not encode: %v", err)
	}
	if err := forest.WriteFileAtomic(fl.output, buf.Bytes(), 0o644); err != nil {
		return located(fl.output, err)
	}
	w := c.OutOrStdout()
	f := r.Forest
	fmt.Fprintf(w, "read %s (%s): %d trees, %d features, %d outputs\n", src, r.Format, len(f.Trees), len(f.Features), f.NumOutputs())
	printNotes(w, r.Notes)
	fmt.Fprintf(w, "wrote %s (format version %d)\n", fl.output, f.Version())
	return nil
}

// printSource prints, for inspect, the format a model file was read as and
// what its importer noted.
func printSource(w io.Writer, path string) error {
	r, err := readSource(path, "", source.Options{})
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "%-18s %s\n", "source format", r.Format)
	printNotes(w, r.Notes)
	return nil
}

func printNotes(w io.Writer, notes []string) {
	for _, n := range notes {
		fmt.Fprintf(w, "  %s\n", n)
	}
}

// sameFile reports whether a and b name one existing file.
func sameFile(a, b string) (bool, error) {
	fa, err := os.Stat(a)
	if err != nil {
		return false, err
	}
	fb, err := os.Stat(b)
	if err != nil {
		return false, err
	}
	return os.SameFile(fa, fb), nil
}

// Package source reads the model files that training stacks save and turns
// each into a validated forest.Forest (format version 2 where the model needs
// it). An importer is a pure function from the file's bytes to a Forest: it
// rewrites the source's semantics exactly (strict comparisons, categories that
// go right, zero-as-missing, base values added after the trees) or refuses
// with an error that names the construct, the file, the tree and the node.
//
// Formats lists every reader; Detect picks one from the content, and Load
// reads a file whatever its format, sawmill's own JSON included.
package source

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"os"
	"strings"

	"github.com/sawmill-dev/sawmill/forest"
)

// Options are what a user can say about a model that its file does not.
type Options struct {
	// Features names the inputs, in input order, where the file has no names
	// (or to rename them). nil keeps the file's names.
	Features []string
	// Classes names the classes, in output order. nil keeps the file's labels
	// (or numbers them 0, 1, ... where it has none).
	Classes []string
	// Iterations keeps only the first N boosting rounds; 0 keeps what the
	// file records as the model's best iteration, or all rounds.
	Iterations int
	// Missing, when non-nil, is a value that also counts as missing wherever
	// it appears as an input (format 2's missing_value), for users who predict
	// with a sentinel such as 0 or -999.
	Missing *float64
	// Read bounds the size of what is read.
	Read forest.ReadOptions
}

// Result is an imported model and what the importer had to say about it.
type Result struct {
	Forest *forest.Forest
	// Format is the Name of the Format that read it.
	Format string
	// Notes are one-line facts a user should see: what was rewritten
	// ("42 strict comparisons rewritten as <= the next float32 below"),
	// which rounds were kept, what was left out (with a warning).
	Notes []string
}

// Format is one reader of one kind of file.
type Format struct {
	// Name is what --from takes and inspect prints: "sawmill", "xgboost-json", ...
	Name string
	// Describe is one line for help texts.
	Describe string
	// Detect reports whether data (the whole file) looks like this format.
	// It must be cheap and must not accept another format's files.
	Detect func(data []byte) bool
	// Read converts the file's bytes; name is used in messages.
	Read func(data []byte, name string, o Options) (*Result, error)
	// DetectDir and ReadDir are set for formats whose models are folders
	// (Spark ML): DetectDir reports whether the folder looks like one, cheaply;
	// ReadDir reads it, with the folder's path in messages.
	DetectDir func(dir string) bool
	ReadDir   func(dir string, o Options) (*Result, error)
}

// Formats is every reader, in the order Detect tries them.
func Formats() []Format {
	return []Format{
		sawmillFormat,
		xgboostJSONFormat,
		xgboostUBJSONFormat,
		lightgbmFormat,
		onnxFormat,
		pmmlFormat,
		sparkFormat,
	}
}

// Names lists the format names, for messages and --from's help.
func Names() []string {
	var names []string
	for _, f := range Formats() {
		names = append(names, f.Name)
	}
	return names
}

// Lookup returns the format called name.
func Lookup(name string) (Format, error) {
	for _, f := range Formats() {
		if f.Name == name {
			return f, nil
		}
	}
	return Format{}, fmt.Errorf("unknown model format %q\nhint: --from takes one of %s", name, strings.Join(Names(), ", "))
}

// Detect returns the format of data, or an error naming the formats tried.
func Detect(data []byte, name string) (Format, error) {
	for _, f := range Formats() {
		if f.Detect(data) {
			return f, nil
		}
	}
	return Format{}, fmt.Errorf("%s: not a model file this reader knows\nhint: formats read: %s; --from FORMAT forces one", name, strings.Join(Names(), ", "))
}

// Load reads the model file at path. from names the format ("" detects it).
// A folder is read by a format that reads folders (LoadDir).
func Load(path, from string, o Options) (*Result, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	if st, err := fh.Stat(); err == nil && st.IsDir() {
		return LoadDir(path, from, o)
	}
	max := o.Read.MaxBytes
	if max <= 0 {
		max = forest.DefaultMaxFileBytes
	}
	data, err := io.ReadAll(io.LimitReader(fh, max+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if int64(len(data)) > max {
		return nil, fmt.Errorf("%s: file is larger than the limit of %d bytes\nhint: raise the limit if the model is meant to be this large", path, max)
	}
	return Decode(data, path, from, o)
}

// LoadDir reads the model folder at dir. from names the format ("" detects
// it among the formats whose models are folders).
func LoadDir(dir, from string, o Options) (*Result, error) {
	var f Format
	if from != "" {
		var err error
		if f, err = Lookup(from); err != nil {
			return nil, err
		}
		if f.ReadDir == nil {
			return nil, fmt.Errorf("%s: is a folder; a %s model is a file", dir, f.Name)
		}
	} else {
		var names []string
		for _, g := range Formats() {
			if g.DetectDir == nil {
				continue
			}
			names = append(names, g.Name)
			if g.DetectDir(dir) {
				f = g
				break
			}
		}
		if f.ReadDir == nil {
			return nil, fmt.Errorf("%s: a folder that holds no model this reader knows\nhint: folders read: %s (a Spark ML model folder holds metadata/ and data/)", dir, strings.Join(names, ", "))
		}
	}
	r, err := f.ReadDir(dir, o)
	if err != nil {
		return nil, err
	}
	r.Format = f.Name
	return r, nil
}

// Decode is Load for a file already in memory.
func Decode(data []byte, name, from string, o Options) (*Result, error) {
	var f Format
	var err error
	if from == "" {
		f, err = Detect(data, name)
	} else {
		f, err = Lookup(from)
	}
	if err != nil {
		return nil, err
	}
	r, err := f.Read(data, name, o)
	if err != nil {
		return nil, err
	}
	r.Format = f.Name
	return r, nil
}

// sawmillFormat is sawmill's own JSON (forest-format.md).
var sawmillFormat = Format{
	Name:     "sawmill",
	Describe: "sawmill's own model file (JSON, format version 1 or 2)",
	Detect: func(data []byte) bool {
		return jsonObject(data) && bytes.Contains(data, []byte(`"sawmill_forest"`))
	},
	Read: func(data []byte, name string, o Options) (*Result, error) {
		f, err := forest.Decode(data, name, o.Read)
		if err != nil {
			return nil, err
		}
		notes, err := o.rename(f, name)
		if err != nil {
			return nil, err
		}
		if err := f.Validate(name); err != nil {
			return nil, err
		}
		return &Result{Forest: f, Notes: notes}, nil
	},
}

// rename applies the names given in o (Features, Classes) to f, which must
// have as many features and classes, and returns notes saying so. Every
// reader calls it once the model is built, before validating it.
func (o Options) rename(f *forest.Forest, name string) ([]string, error) {
	var notes []string
	if o.Features != nil {
		if len(o.Features) != len(f.Features) {
			return nil, fmt.Errorf("%s: --features names %d features, the model has %d", name, len(o.Features), len(f.Features))
		}
		f.Features = o.Features
		notes = append(notes, "features renamed from the command line")
	}
	if o.Classes != nil {
		if len(o.Classes) != len(f.Classes) {
			return nil, fmt.Errorf("%s: --classes names %d classes, the model has %d", name, len(o.Classes), len(f.Classes))
		}
		f.Classes = o.Classes
		notes = append(notes, "classes renamed from the command line")
	}
	return notes, nil
}

// missing32 applies Missing to a model that compares float32 inputs: the
// value is rounded to float32 as the inputs are. It returns the note to show,
// or "" when no value was given.
func (o Options) missing32(f *forest.Forest, name string) (string, error) {
	if o.Missing == nil {
		return "", nil
	}
	v := *o.Missing
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "", fmt.Errorf("%s: --missing %v: give a finite number (NaN is always missing)", name, v)
	}
	f.HasMissingValue, f.MissingValue = true, forest.Round32(v)
	return fmt.Sprintf("inputs equal to %v (as float32) count as missing", v), nil
}

// jsonObject reports whether data starts, after white space, with '{' and
// its next non-space byte is '"' or '}' (text JSON, not UBJSON).
func jsonObject(data []byte) bool {
	t := bytes.TrimLeft(data, " \t\r\n\ufeff")
	if len(t) < 2 || t[0] != '{' {
		return false
	}
	u := bytes.TrimLeft(t[1:], " \t\r\n")
	return len(u) > 0 && (u[0] == '"' || u[0] == '}')
}

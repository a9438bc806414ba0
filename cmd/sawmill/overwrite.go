package main

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
)

// The rule for every file a command writes: never over one of the
// command's own inputs (compared by identity, so another spelling of the
// path, a symbolic link or a hard link is caught too), and never over a
// file sawmill did not write unless --force.

// checkOutput reports whether the command may write path. inputs are the
// command's input files ("" entries are skipped); ours says whether an
// existing file is one sawmill wrote (and may be replaced); what names the
// kind of file for the message ("a model trained by sawmill", say).
func checkOutput(path string, inputs []string, force bool, what string, ours func(path string) bool) error {
	fi, err := os.Stat(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return located(path, err)
	}
	if err := notAnInput(path, fi, inputs); err != nil {
		return err
	}
	if fi.IsDir() {
		return fmt.Errorf("%s: is a folder, and a file is to be written there\nhint: name a file", path)
	}
	if force || ours(path) {
		return nil
	}
	return fmt.Errorf("%s: exists and is not %s; not overwriting it\nhint: choose another name, or pass --force to replace it", path, what)
}

// notAnInput fails when fi (the file at path) is one of inputs.
func notAnInput(path string, fi os.FileInfo, inputs []string) error {
	for _, in := range inputs {
		if in == "" {
			continue
		}
		if ii, err := os.Stat(in); err == nil && os.SameFile(fi, ii) {
			if in == path {
				return fmt.Errorf("%s: is an input of this command; not writing over it\nhint: choose another output name", path)
			}
			return fmt.Errorf("%s: is the input %s; not writing over it\nhint: choose another output name", path, in)
		}
	}
	return nil
}

// headLines returns up to n lines from the first 4 KiB of the file at path.
func headLines(path string, n int) [][]byte {
	fh, err := os.Open(path)
	if err != nil {
		return nil
	}
	defer fh.Close()
	sc := bufio.NewScanner(io.LimitReader(fh, 4096))
	var out [][]byte
	for len(out) < n && sc.Scan() {
		out = append(out, bytes.Clone(sc.Bytes()))
	}
	return out
}

// isGenerated reports whether the file at path exists and names sawmill as
// its generator in its first lines, as every file sawmill emits does (a
// file without it is the user's and is not overwritten).
func isGenerated(path string) (exists, generated bool) {
	if _, err := os.Stat(path); err != nil {
		return false, false
	}
	for _, l := range headLines(path, 8) {
		l = bytes.ToLower(l)
		if bytes.Contains(l, []byte("sawmill")) && bytes.Contains(l, []byte("generated")) {
			return true, true
		}
	}
	return true, false
}

// generated is isGenerated's answer alone, as an ours function.
func generated(path string) bool {
	_, g := isGenerated(path)
	return g
}

// trainedModel reports whether the file at path is a model sawmill train
// wrote: its provenance names the trainer. A model brought from elsewhere
// (a scikit-learn export) is the user's and is not replaced.
func trainedModel(path string) bool {
	b, err := os.ReadFile(path)
	if err != nil {
		return false
	}
	return bytes.HasPrefix(bytes.TrimSpace(b), []byte("{")) &&
		bytes.Contains(b, []byte(`"sawmill_forest"`)) &&
		(bytes.Contains(b, []byte(`"trainer": "sawmill train"`)) || bytes.Contains(b, []byte(`"trainer":"sawmill train"`)))
}

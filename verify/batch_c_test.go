package verify

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/sawmill-dev/sawmill/emit/ctarget"
)

// ScoreBatch implements BatchScorer for the registered runner's
// cQuickMatrix: every job is emitted with its own name (m<i>), and per
// configuration all of them and one driver, dispatching on the job number
// in argv[1], are compiled with the same warning flags and -Werror and
// linked into one binary. Each job runs
// in every build, whose outputs must be the same bytes. With Full set it
// scores the jobs one at a time with Score.
func (r cRunner) ScoreBatch(ctx context.Context, jobs []Job, dir string) ([]BatchResult, error) {
	if err := cTools(r.AllCompilers); err != nil {
		return nil, err
	}
	res := make([]BatchResult, len(jobs))
	if r.Full {
		for i, j := range jobs {
			d := filepath.Join(dir, strconv.Itoa(i))
			if err := os.Mkdir(d, 0o755); err != nil {
				return nil, err
			}
			res[i].Result, res[i].Err = r.Score(ctx, j.Program, j.Layout, j.Variant, j.Rows, d)
		}
		return res, nil
	}
	var built []int
	var names, fts, models, alone []string
	for i, j := range jobs {
		if j.Variant == "float" {
			if err := ctarget.FitsFloat(j.Program); err != nil {
				res[i].Err = fmt.Errorf("%w: float C: %v", ErrDeclined, err)
				continue
			}
		}
		o := r.options(j.Layout, j.Variant)
		o.Name = fmt.Sprintf("m%d", i)
		o.Threads = true
		files, err := ctarget.Emit(j.Program, o)
		if err != nil {
			res[i].Err = declined(err)
			continue
		}
		for _, f := range files {
			if err := os.WriteFile(filepath.Join(dir, f.Name), f.Data, 0o644); err != nil {
				return nil, err
			}
		}
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("rows%d.txt", i)), cRows(j.Rows), 0o644); err != nil {
			return nil, err
		}
		ft := "double"
		if o.Float {
			ft = "float"
		}
		built = append(built, i)
		names, fts = append(names, o.Name), append(fts, ft)
		models = append(models, o.Name+".c", o.Name+"_threads.c")
		if !j.Light {
			alone = append(alone, o.Name+".c", o.Name+"_threads.c")
		}
	}
	if len(built) == 0 {
		return res, nil
	}
	if err := os.WriteFile(filepath.Join(dir, "driver.c"), []byte(cBatchDriver(jobs, built, names, fts)), 0o644); err != nil {
		return nil, err
	}

	// Build: per configuration, the models in a few unity files (each
	// including a share of the models' .c files), compiled to objects in a
	// directory of its own, and one link. Compiler start-up, not code, is
	// most of a small model's cost: 64 models' 256 files took 44 s of CPU
	// compiled one by one and 14 s in unity files. That each .c compiles on
	// its own, which a unity file could hide (an #include another model's
	// file supplies), is checked for the jobs that are not Light.
	matrix := cBuilds(cQuickMatrix)
	units := chunk(models, runtime.NumCPU())
	for c, u := range units {
		var b strings.Builder
		for _, s := range u {
			fmt.Fprintf(&b, "#include \"%s\"\n", s)
		}
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("unity%d.c", c)), []byte(b.String()), 0o644); err != nil {
			return nil, err
		}
	}
	sources, objs := []string{"driver.c"}, []string{"driver.o"}
	for c := range units {
		sources, objs = append(sources, fmt.Sprintf("unity%d.c", c)), append(objs, fmt.Sprintf("unity%d.o", c))
	}
	flags := func(b cBuild) []string {
		f := append([]string{"-std=" + b.std}, r.warnings()...)
		f = append(f, "-"+b.opt)
		if b.sanitize {
			f = append(f, "-g", "-fsanitize=address,undefined", "-fno-sanitize-recover=all", "-fno-omit-frame-pointer")
		}
		return f
	}
	bins := make([]string, len(matrix))
	errs := make([]error, len(matrix)+1)
	start := time.Now()
	var wg sync.WaitGroup
	if len(alone) > 0 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			cJobs <- struct{}{}
			defer func() { <-cJobs }()
			args := append(flags(matrix[0]), "-fsyntax-only")
			if err := cCommand(ctx, dir, nil, nil, matrix[0].cc, append(args, alone...)...); err != nil {
				errs[len(matrix)] = fmt.Errorf("%s, each file alone: %v", matrix[0], err)
			}
		}()
	}
	for k, b := range matrix {
		obj := filepath.Join(dir, fmt.Sprintf("build%d", k))
		if err := os.Mkdir(obj, 0o755); err != nil {
			return nil, err
		}
		bins[k] = filepath.Join(obj, "score")
		wg.Add(1)
		go func(k int, b cBuild) {
			defer wg.Done()
			cerrs := make([]error, len(sources))
			var cw sync.WaitGroup
			for c, src := range sources {
				cw.Add(1)
				go func(c int, src string) {
					defer cw.Done()
					cJobs <- struct{}{}
					defer func() { <-cJobs }()
					args := append(flags(b), "-I", "..", "-c", filepath.Join("..", src))
					cerrs[c] = cCommand(ctx, obj, nil, nil, b.cc, args...)
				}(c, src)
			}
			cw.Wait()
			if err := errors.Join(cerrs...); err != nil {
				errs[k] = fmt.Errorf("%s: %v", b, err)
				return
			}
			cJobs <- struct{}{}
			defer func() { <-cJobs }()
			args := append(append(flags(b), "-o", "score"), objs...)
			if err := cCommand(ctx, obj, nil, nil, b.cc, append(args, "-pthread", "-lm")...); err != nil {
				errs[k] = fmt.Errorf("%s: %v", b, err)
			}
		}(k, b)
	}
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	build := time.Since(start)

	// Run: every job in every build.
	type run struct {
		out []byte
		err error
		dur time.Duration
	}
	runs := make([][]run, len(jobs))
	for _, i := range built {
		runs[i] = make([]run, len(matrix))
		for k := range matrix {
			wg.Add(1)
			go func(i, k int) {
				defer wg.Done()
				cJobs <- struct{}{}
				defer func() { <-cJobs }()
				var stdout bytes.Buffer
				t0 := time.Now()
				err := cCommand(ctx, dir, nil, &stdout, bins[k], strconv.Itoa(i), fmt.Sprintf("rows%d.txt", i))
				runs[i][k] = run{stdout.Bytes(), err, time.Since(t0)}
			}(i, k)
		}
	}
	wg.Wait()
	for _, i := range built {
		res[i].Err = func() error {
			for k, ru := range runs[i] {
				if ru.err != nil {
					return fmt.Errorf("%s: %v", matrix[k], ru.err)
				}
			}
			for k, ru := range runs[i][1:] {
				if !bytes.Equal(ru.out, runs[i][0].out) {
					return fmt.Errorf("%s and %s print different outputs:\n%s", matrix[0], matrix[k+1], firstDiff(runs[i][0].out, ru.out))
				}
			}
			rr := &Result{Build: build, Run: runs[i][0].dur}
			if err := parseCOutput(runs[i][0].out, jobs[i].Program, jobs[i].Rows.Len(), rr); err != nil {
				return err
			}
			res[i].Result = rr
			return nil
		}()
	}
	return res, nil
}

// chunk splits s into at most n runs of about equal length.
func chunk(s []string, n int) [][]string {
	n = max(1, min(n, len(s)))
	var out [][]string
	for c := 0; c < n; c++ {
		out = append(out, s[c*len(s)/n:(c+1)*len(s)/n])
	}
	return out
}

// cBatchDriver is the batch's main: "score JOB ROWS" scores the rows file
// ROWS (as cRows writes it) with job JOB's model and prints what cDriver
// prints.
func cBatchDriver(jobs []Job, built []int, names, fts []string) string {
	var b strings.Builder
	b.WriteString("#include <stdio.h>\n#include <stdlib.h>\n#include <string.h>\n\n")
	for _, name := range names {
		fmt.Fprintf(&b, "#include \"%s.h\"\n#include \"%s_threads.h\"\n", name, name)
	}
	for k, i := range built {
		b.WriteString(cScoreFunc(names[k], fts[k], jobs[i].Program.IsClassifier()))
	}
	b.WriteString(`
int main(int argc, char **argv)
{
	FILE *in;
	int rc;
	if (argc != 3 || (in = fopen(argv[2], "r")) == NULL) {
		fprintf(stderr, "usage: score JOB ROWS\n");
		return 2;
	}
	switch (atoi(argv[1])) {
`)
	for k, i := range built {
		fmt.Fprintf(&b, "\tcase %d:\n\t\trc = score_%s(in);\n\t\tbreak;\n", i, names[k])
	}
	b.WriteString(`	default:
		fprintf(stderr, "no job %s\n", argv[1]);
		rc = 2;
		break;
	}
	fclose(in);
	return rc;
}
`)
	return b.String()
}

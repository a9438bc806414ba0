package ctarget_test

import (
	"fmt"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// Read a model, compile it and emit C99: pump_health.h and pump_health.c,
// with no heap and no recursion. The float variant needs the program
// compiled for float32 inputs.
func ExampleEmit() {
	// a small classifier of the invented pump-health scenario (the demo's)
	f, err := forest.ReadFile("../testdata/pump-health.json")
	if err != nil {
		fmt.Println(err)
		return
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	files, err := ctarget.Emit(p, ctarget.Options{Name: "pump_health"})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, file := range files {
		fmt.Println(file.Name)
	}
	for _, line := range strings.Split(string(files[0].Data), "\n") {
		if strings.HasPrefix(line, "#define PUMP_HEALTH_NUM") || strings.HasPrefix(line, "void ") || strings.HasPrefix(line, "int ") {
			fmt.Println(line)
		}
	}
	// Output:
	// pump_health.h
	// pump_health.c
	// #define PUMP_HEALTH_NUM_FEATURES 2
	// #define PUMP_HEALTH_NUM_OUTPUTS 2
	// #define PUMP_HEALTH_NUM_CLASSES 2
	// void pump_health_predict(const double *x, double *out);
	// void pump_health_predict_batch(const double *x, size_t n, double *out);
	// int pump_health_predict_class(const double *x);
	// int pump_health_fp_check(void);
}

package emit_test

import (
	"fmt"

	"github.com/sawmill-dev/sawmill/emit"
)

// Identifiers turns feature names into valid, distinct identifiers for C
// or SQL: the mapping depends only on the list.
func ExampleIdentifiers() {
	fmt.Println(emit.Identifiers([]string{"bearing temp (°C)", "bearing_temp_C", "2nd stage", "bearing temp [°C]"}, "f_", nil))
	// Output: [bearing_temp_C bearing_temp_C_2 f_2nd_stage bearing_temp_C_3]
}

// Every target's Options has a Version field naming the sawmill version in
// the header; empty means emit.Version.
func ExampleHeaderVersion() {
	fmt.Println(emit.HeaderVersion("") == emit.Version, emit.HeaderVersion("1.2.3-local"))
	// Output: true 1.2.3-local
}

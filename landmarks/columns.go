package landmarks

import "strings"

// KeptColumnPrefix is put before the name of a kept (passed-through) column
// that would otherwise have the name of one of the output's own columns, as
// when the output of map is mapped again: its sd_x_um becomes
// input_sd_x_um, beside the new sd_x_um.
const KeptColumnPrefix = "input_"

// KeptColumnNames returns the names under which an output with the columns
// own writes the kept columns extra: each as it is, or with KeptColumnPrefix
// put before it (again, until it is unique) when it has the name of one of
// own's or of a kept column before it. Names are compared regardless of
// case, as the readers compare them, so that every output can be read
// back.
func KeptColumnNames(own, extra []string) []string {
	used := make(map[string]bool, len(own)+len(extra))
	for _, c := range own {
		used[strings.ToLower(c)] = true
	}
	out := make([]string, len(extra))
	for i, c := range extra {
		name := c
		for used[strings.ToLower(name)] {
			name = KeptColumnPrefix + name
		}
		used[strings.ToLower(name)] = true
		out[i] = name
	}
	return out
}

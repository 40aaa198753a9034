package landmarks

import (
	"reflect"
	"testing"
)

func TestKeptColumnNames(t *testing.T) {
	own := []string{"id", "x", "sd_x_um", "status"}
	for _, tc := range []struct {
		extra, want []string
	}{
		{nil, []string{}},
		{[]string{"depth"}, []string{"depth"}},
		{[]string{"SD_X_UM", "status"}, []string{"input_SD_X_UM", "input_status"}},
		{[]string{"status", "input_status"}, []string{"input_status", "input_input_status"}},
		{[]string{"input_status", "status"}, []string{"input_status", "input_input_status"}},
	} {
		if got := KeptColumnNames(own, tc.extra); !reflect.DeepEqual(got, tc.want) {
			t.Errorf("KeptColumnNames(%v) = %v, want %v", tc.extra, got, tc.want)
		}
	}
}

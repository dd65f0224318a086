package main

import (
	"bytes"
	"strings"
	"testing"
)

func TestRuns(t *testing.T) {
	for _, noise := range []string{"0", "1e-3"} {
		var out, errb bytes.Buffer
		if code := run([]string{"-noise", noise}, &out, &errb); code != 0 {
			t.Fatalf("noise %s: exit %d: %s", noise, code, errb.String())
		}
		if !strings.Contains(out.String(), "Kruskal uniqueness: true") {
			t.Errorf("noise %s: unexpected output\n%s", noise, out.String())
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"-noise", "7"}, &out, &errb); code != 2 {
		t.Errorf("bad flag: exit %d", code)
	}
}

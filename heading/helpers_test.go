package heading

import (
	"io"
	"log/slog"
	"os"
	"os/exec"
	"testing"
)

var discardLogger = slog.New(slog.NewTextHandler(io.Discard, nil))

// needTool returns the path of an outside program, skipping the test when
// it is missing unless NULLSEEK_REQUIRE_TOOLS=1 (then the test fails).
func needTool(t *testing.T, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("NULLSEEK_REQUIRE_TOOLS") == "1" {
			t.Fatalf("%s not found and NULLSEEK_REQUIRE_TOOLS=1: %v", name, err)
		}
		t.Skipf("%s not found (install it or set NULLSEEK_REQUIRE_TOOLS=1 to make this a failure): %v", name, err)
	}
	return p
}

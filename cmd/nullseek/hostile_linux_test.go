package main

import (
	"fmt"
	"os"
	"strconv"
	"strings"
	"syscall"
)

// Environment of a child that sets its file-size limit and execs the
// command (see hostileExecWithLimit).
const (
	hostileFsizeEnv = "NULLSEEK_HOSTILE_FSIZE"
	hostileExecEnv  = "NULLSEEK_HOSTILE_EXEC"
)

// hostileExecWithLimit runs before the tests when the test binary is
// started as a full-disk case's child: it sets RLIMIT_FSIZE on itself
// (inherited across execve(2), setrlimit(2)) and replaces itself with the
// nullseek binary and the case's arguments, so the limit holds for every
// write the command makes. A write past the limit fails with EFBIG.
func init() {
	bin, lim := os.Getenv(hostileExecEnv), os.Getenv(hostileFsizeEnv)
	if bin == "" || lim == "" {
		return
	}
	n, err := strconv.ParseUint(lim, 10, 64)
	if err == nil {
		err = syscall.Setrlimit(syscall.RLIMIT_FSIZE, &syscall.Rlimit{Cur: n, Max: n})
	}
	if err == nil {
		var env []string
		for _, e := range os.Environ() {
			if strings.HasPrefix(e, hostileExecEnv+"=") || strings.HasPrefix(e, hostileFsizeEnv+"=") {
				continue
			}
			env = append(env, e)
		}
		err = syscall.Exec(bin, append([]string{bin}, os.Args[1:]...), env)
	}
	fmt.Fprintf(os.Stderr, "hostile corpus: limiting the file size to %s: %v\n", lim, err)
	os.Exit(125)
}

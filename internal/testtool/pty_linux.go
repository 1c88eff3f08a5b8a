//go:build linux

package testtool

import (
	"os"
	"strconv"
	"syscall"
	"unsafe"
)

// OpenPTY opens a pseudo-terminal pair through /dev/ptmx (Linux
// devpts(4): unlock with TIOCSPTLCK, number with TIOCGPTN): the master
// end to write to and the slave's path, a serial line for the reader
// under test. The caller closes the master.
func OpenPTY() (master *os.File, slavePath string, err error) {
	m, err := os.OpenFile("/dev/ptmx", os.O_RDWR|syscall.O_NOCTTY, 0)
	if err != nil {
		return nil, "", err
	}
	var unlock int32
	if _, _, e := syscall.Syscall(syscall.SYS_IOCTL, m.Fd(), syscall.TIOCSPTLCK, uintptr(unsafe.Pointer(&unlock))); e != 0 {
		m.Close()
		return nil, "", e
	}
	var n uint32
	if _, _, e := syscall.Syscall(syscall.SYS_IOCTL, m.Fd(), syscall.TIOCGPTN, uintptr(unsafe.Pointer(&n))); e != 0 {
		m.Close()
		return nil, "", e
	}
	return m, "/dev/pts/" + strconv.Itoa(int(n)), nil
}

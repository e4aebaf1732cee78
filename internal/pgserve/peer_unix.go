//go:build unix

package pgserve

import (
	"net"
	"syscall"
)

// peerClosed reports whether the client has closed its end of c, without consuming
// anything it sent: a peek that returns zero bytes means end of stream.
func peerClosed(c net.Conn) bool {
	sc, ok := c.(syscall.Conn)
	if !ok {
		return false
	}
	raw, err := sc.SyscallConn()
	if err != nil {
		return false
	}
	closed := false
	var buf [1]byte
	raw.Read(func(fd uintptr) bool {
		n, _, err := syscall.Recvfrom(int(fd), buf[:], syscall.MSG_PEEK|syscall.MSG_DONTWAIT)
		closed = n == 0 && err == nil
		return true // never wait for data
	})
	return closed
}

//go:build !unix

package pgserve

import "net"

// peerClosed cannot peek at sockets here; statements of vanished clients run to their
// end (or the statement timeout).
func peerClosed(net.Conn) bool { return false }

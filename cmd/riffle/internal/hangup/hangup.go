// Package hangup subscribes the process to SIGHUP while it initialises,
// before main runs: until a handler is installed the signal's default
// action ends the process, and a reload signal sent while `riffle serve`
// starts must not. Go initialises a package as soon as its imports are
// (and before the larger ones that sort earlier by path), so this one, which
// imports only os/signal, subscribes a millisecond or two into the process
// rather than after every dependency's set-up.
//
// Its one channel is process-wide state by nature: signal disposition
// belongs to the process. It is safe for concurrent use.
package hangup

import (
	"os"
	"os/signal"
	"syscall"
)

// early receives every SIGHUP from package initialisation on; it holds one
// pending signal, and further ones are dropped while it is full (a reload
// reads the file anew, so one pending reload stands for many).
var early = make(chan os.Signal, 1)

func init() { signal.Notify(early, syscall.SIGHUP) }

// Signals returns the channel subscribed at initialisation.
func Signals() <-chan os.Signal { return early }

// Release stops the subscription, restoring SIGHUP's default action, for
// commands that do not reload.
func Release() { signal.Stop(early) }

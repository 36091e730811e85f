package main

import "errors"

var (
	// errUsage marks a bad command line; the process exits 2.
	errUsage = errors.New("bad usage")
	// errChild marks a child process (backends or a proxy) that could not
	// start, said it failed, or exited badly.
	errChild = errors.New("child process failed")
	// errReadyLine marks a child's first line of output that is neither a
	// ready line nor a failure line.
	errReadyLine = errors.New("malformed ready line")
	// errNoPeak marks a /proc/<pid>/status text without a VmHWM line.
	errNoPeak = errors.New("no VmHWM line")
	// errAnswer marks a mode whose answer to the pre-flight request was not
	// a 200 with a 20-item list.
	errAnswer = errors.New("unexpected answer")
)

package main

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
)

// report prints one line per result and a summary, and reports whether
// the check passed: every mutation killed, or surviving as a declared
// equivalent.
func report(w io.Writer, results []Result) bool {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	count := map[string]int{}
	pass := true
	for _, r := range results {
		m := r.Mutation
		verdict, detail := string(r.Verdict), strings.Join(r.Failed, ", ")
		switch {
		case r.Verdict == Survived && m.Equivalent != "":
			verdict, detail = "equivalent", m.Equivalent
		case r.Verdict == Survived:
			detail = m.Why
			pass = false
		case r.Verdict == Killed && m.Equivalent != "":
			detail += " (marked equivalent, but killed: drop the mark)"
			pass = false
		case r.Verdict != Killed:
			pass = false
		}
		count[verdict]++
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\n", verdict, m.Name, strings.Join(m.Packages, " "), detail)
	}
	tw.Flush()
	fmt.Fprintf(w, "%d mutations: %d killed, %d survived, %d equivalent, %d broken, %d stale\n",
		len(results), count["killed"], count["survived"], count["equivalent"], count["broken"], count["stale"])
	return pass
}

// Command skipcheck reads `go test -json` on standard input, prints what
// plain `go test` prints (each package's ok or FAIL line, the output of
// failed tests) plus every skip with its reason, and ends with the line
// "N passed, N failed, N skipped". It exits non-zero when a test failed,
// a package did not build, or a test was skipped for any reason but an
// accepted one: a helper or child process of another test, which skips
// when run on its own; a long proof that a make target runs, whose reason
// names that target as "(make TARGET)" and which the Makefile defines; or
// a check that no unprivileged user can make (listed in accepted below,
// and accepted only when not root).
//
// Usage: go test -json ./... | go run ./.ci/skipcheck
package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"regexp"
	"sort"
	"strings"
)

// event is one line of `go test -json` (cmd/test2json).
type event struct {
	Action  string
	Package string
	Test    string
	Output  string
}

// helperMarks mark the skip reason of a helper or child process.
var helperMarks = []string{"helper process", "child process"}

// rootOnly are skips accepted when the suite runs as a user other than
// root, each with why no unprivileged process can make the check.
var rootOnly = map[string]string{
	"rolloff/sweep/store.TestReadOnlyFiles": "chattr +i needs CAP_LINUX_IMMUTABLE in the initial user namespace",
}

type key struct{ pkg, test string }

func main() {
	os.Exit(run(os.Stdin, os.Stdout, os.Geteuid() == 0))
}

func run(in io.Reader, out io.Writer, root bool) int {
	outputs := map[key][]string{}
	var passed, failed, skipped int
	var badSkips, failedPkgs []string
	sc := bufio.NewScanner(in)
	sc.Buffer(make([]byte, 1<<20), 16<<20)
	for sc.Scan() {
		line := sc.Bytes()
		var ev event
		if err := json.Unmarshal(line, &ev); err != nil || ev.Action == "" {
			// Not an event (a build error printed as is): show it.
			fmt.Fprintln(out, string(line))
			continue
		}
		k := key{ev.Package, ev.Test}
		switch ev.Action {
		case "output":
			if ev.Test == "" {
				if keepPackageLine(ev.Output) {
					fmt.Fprint(out, ev.Output)
				}
				continue
			}
			outputs[k] = append(outputs[k], ev.Output)
		case "pass":
			if ev.Test != "" {
				passed++
				delete(outputs, k)
			}
		case "fail":
			if ev.Test == "" {
				failedPkgs = append(failedPkgs, ev.Package)
				continue
			}
			failed++
			for _, o := range outputs[k] {
				if !strings.HasPrefix(o, "=== ") {
					fmt.Fprint(out, o)
				}
			}
			delete(outputs, k)
		case "skip":
			if ev.Test == "" {
				continue // a package without tests
			}
			skipped++
			reason := skipReason(outputs[k])
			delete(outputs, k)
			ok, why := accepted(ev.Package, ev.Test, reason, root)
			mark := "accepted: " + why
			if !ok {
				mark = "NOT ACCEPTED"
				badSkips = append(badSkips, ev.Package+"."+ev.Test+": "+reason)
			}
			fmt.Fprintf(out, "--- SKIP: %s.%s: %s [%s]\n", ev.Package, ev.Test, reason, mark)
		}
	}
	if err := sc.Err(); err != nil {
		fmt.Fprintf(out, "skipcheck: reading go test -json: %v\n", err)
		return 2
	}
	sort.Strings(badSkips)
	code := 0
	if len(badSkips) > 0 {
		fmt.Fprintf(out, "skipcheck: %d tests skipped for a reason not accepted (install what they need, or make them run):\n", len(badSkips))
		for _, s := range badSkips {
			fmt.Fprintln(out, "  "+s)
		}
		code = 1
	}
	if failed > 0 || len(failedPkgs) > 0 {
		code = 1
	}
	fmt.Fprintf(out, "%d passed, %d failed, %d skipped\n", passed, failed, skipped)
	return code
}

// keepPackageLine reports whether a package-level output line is one
// plain `go test` prints (not the -v framing the JSON carries).
func keepPackageLine(s string) bool {
	t := strings.TrimSpace(s)
	return t != "PASS" && t != "FAIL" && !strings.HasPrefix(t, "=== ")
}

// skipReason is the message a skipped test gave, from its output: the
// lines after the "=== RUN" framing, before the "--- SKIP" line.
func skipReason(lines []string) string {
	var msg []string
	for _, l := range lines {
		t := strings.TrimSpace(l)
		if t == "" || strings.HasPrefix(t, "=== ") || strings.HasPrefix(t, "--- SKIP") {
			continue
		}
		msg = append(msg, t)
	}
	if len(msg) == 0 {
		return "(no reason given)"
	}
	return strings.Join(msg, " / ")
}

// makeTarget finds the make target a skip reason names.
var makeTarget = regexp.MustCompile(`\(make ([a-z][a-z0-9-]*)\)`)

// makefileHas says whether the Makefile in the working directory (the
// module's root, where CI runs) defines target.
func makefileHas(target string) bool {
	data, err := os.ReadFile("Makefile")
	if err != nil {
		return false
	}
	for _, l := range strings.Split(string(data), "\n") {
		if strings.HasPrefix(l, target+":") {
			return true
		}
	}
	return false
}

// accepted says whether a skip is one of the accepted kinds, and why.
func accepted(pkg, test, reason string, root bool) (bool, string) {
	for _, m := range helperMarks {
		if strings.Contains(reason, m) {
			return true, "a " + m + " of another test"
		}
	}
	if m := makeTarget.FindStringSubmatch(reason); m != nil && makefileHas(m[1]) {
		return true, "a long proof run by make " + m[1]
	}
	if why, ok := rootOnly[pkg+"."+test]; ok && !root {
		return true, why + " (not root)"
	}
	return false, ""
}

package layering

import (
	"os/exec"
	"sort"
	"strings"
	"testing"
)

const mod = "github.com/tauvox/tauvox/"

// rule forbids the packages matching from (a path relative to the module,
// "io/*" for every package under io) to depend, directly or through other
// packages, on any package matching one of to.
type rule struct {
	from string
	to   []string
	why  string
}

// rules is the import rule: imports point one way, cmd → pipeline → fit,
// roi, io/* → the core image type and the leaf packages.
var rules = []rule{
	{"fit", []string{"io/*", "roi", "roi/*", "internal/pipeline", "internal/report", "cmd/*"}, "fit imports no io/* package: no file formats in the models and engine"},
	{"io/*", []string{"fit", "fit/*", "roi", "roi/*", "internal/pipeline", "internal/report", "cmd/*"}, "io/* never imports fit or roi: formats know nothing of models or regions"},
	{"roi", []string{"io/*", "internal/pipeline", "internal/report", "cmd/*"}, "roi works on images, not files"},
	{"roi/history", []string{"fit", "fit/*", "roi/phantom", "io/*"}, "the stability history depends on no solver: it reads qa.json through roi/qa"},
	{"roi/qa", []string{"*"}, "qa.json's types are a leaf"},
	{"volume", []string{"*"}, "the core image type is a leaf"},
	{"internal/output", []string{"*"}, "the atomic writer and error-line helper are a leaf"},
	{"internal/mapped", []string{"*"}, "mapping files into memory is a leaf"},
	{"internal/prefault", []string{"*"}, "prefaulting memory is a leaf"},
	{"internal/halves", []string{"*"}, "running two halves at once is a leaf"},
	{"internal/threshold", []string{"*"}, "Otsu's threshold is a leaf"},
	{"internal/regular", []string{"*"}, "opening inputs without blocking on special files is a leaf"},
	{"internal/completion", []string{"*"}, "the completion scripts are written from the command line's description: a leaf"},
	{"internal/report", []string{"internal/pipeline", "internal/qarun", "cmd/*"}, "the reports render results; they do not run fits or QA sessions"},
	{"internal/pipeline", []string{"internal/qarun", "cmd/*"}, "the pipeline serves the QA run and the command line, not the reverse"},
	{"*", []string{"cmd/*"}, "nothing imports the command"},
}

// allowed are known exceptions, each with its reason; the test fails when
// one is no longer needed, so the list only shrinks.
var allowed = map[[2]string]string{}

func match(pattern, pkg string) bool {
	switch {
	case pattern == "*":
		return true
	case strings.HasSuffix(pattern, "/*"):
		return strings.HasPrefix(pkg, strings.TrimSuffix(pattern, "*"))
	}
	return pkg == pattern
}

// TestImportRule lists every package of the module with its dependencies
// (go list -deps, test files left out) and checks every rule.
func TestImportRule(t *testing.T) {
	out, err := exec.Command("go", "list", "-f", `{{.ImportPath}}{{range .Deps}} {{.}}{{end}}`, mod+"...").Output()
	if err != nil {
		t.Fatalf("go list: %v", err)
	}
	used := map[[2]string]bool{}
	npkg := 0
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		f := strings.Fields(line)
		pkg := strings.TrimPrefix(f[0], mod)
		npkg++
		var deps []string
		for _, d := range f[1:] {
			if strings.HasPrefix(d, mod) {
				deps = append(deps, strings.TrimPrefix(d, mod))
			}
		}
		sort.Strings(deps)
		for _, r := range rules {
			if !match(r.from, pkg) {
				continue
			}
			for _, d := range deps {
				for _, to := range r.to {
					if !match(to, d) || d == pkg {
						continue
					}
					if _, ok := allowed[[2]string{pkg, d}]; ok {
						used[[2]string{pkg, d}] = true
						continue
					}
					t.Errorf("%s depends on %s: %s", pkg, d, r.why)
				}
			}
		}
	}
	if npkg < 15 {
		t.Fatalf("go list found %d packages; expected the whole module", npkg)
	}
	for k, why := range allowed {
		if !used[k] {
			t.Errorf("exception %s → %s (%s) is no longer needed: remove it", k[0], k[1], why)
		}
	}
}

// TestRuleMatches: the patterns match what they say (a rule that matches
// nothing would let anything through).
func TestRuleMatches(t *testing.T) {
	for _, c := range []struct {
		pattern, pkg string
		want         bool
	}{
		{"io/*", "io/nifti", true}, {"io/*", "io", false}, {"io/*", "internal/pipeline", false},
		{"fit", "fit", true}, {"fit", "fit/x", false}, {"*", "volume", true}, {"roi", "roi/qa", false},
	} {
		if got := match(c.pattern, c.pkg); got != c.want {
			t.Errorf("match(%q, %q) = %v", c.pattern, c.pkg, got)
		}
	}
}

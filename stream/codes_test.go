package stream

import (
	"go/ast"
	goparser "go/parser"
	"go/token"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// RejectCodes is the one list of reject codes: it holds every Code…
// constant of the package (read from the source, so a code added without
// joining the list fails here), once each, each a snake_case word, and the
// codes CONTRACT.md §2 names.
func TestRejectCodesAreTheList(t *testing.T) {
	fset := token.NewFileSet()
	names, err := filepath.Glob("*.go")
	if err != nil {
		t.Fatal(err)
	}
	declared := map[string]string{} // value → constant name
	for _, name := range names {
		if strings.HasSuffix(name, "_test.go") {
			continue
		}
		f, err := goparser.ParseFile(fset, name, nil, 0)
		if err != nil {
			t.Fatal(err)
		}
		for _, d := range f.Decls {
			g, ok := d.(*ast.GenDecl)
			if !ok || g.Tok != token.CONST {
				continue
			}
			for _, s := range g.Specs {
				vs := s.(*ast.ValueSpec)
				for i, name := range vs.Names {
					if !strings.HasPrefix(name.Name, "Code") || i >= len(vs.Values) {
						continue
					}
					lit, ok := vs.Values[i].(*ast.BasicLit)
					if !ok || lit.Kind != token.STRING {
						t.Errorf("%s is not a string literal", name.Name)
						continue
					}
					v, _ := strconv.Unquote(lit.Value)
					if prev, dup := declared[v]; dup {
						t.Errorf("code %q declared twice: %s and %s", v, prev, name.Name)
					}
					declared[v] = name.Name
				}
			}
		}
	}
	list := RejectCodes()
	seen := map[string]bool{}
	for _, c := range list {
		if seen[c] {
			t.Errorf("RejectCodes lists %q twice", c)
		}
		seen[c] = true
		if _, ok := declared[c]; !ok {
			t.Errorf("RejectCodes lists %q, which no Code… constant declares", c)
		}
	}
	for v, name := range declared {
		if !seen[v] {
			t.Errorf("%s = %q is missing from RejectCodes", name, v)
		}
	}
	// CONTRACT.md §2: "code is a short snake_case word" and the codes it names.
	snake := regexp.MustCompile(`^[a-z]+(_[a-z]+)*$`)
	for _, c := range list {
		if !snake.MatchString(c) {
			t.Errorf("code %q is not snake_case", c)
		}
	}
	for _, c := range []string{"not_json", "not_finite", "bad_time", "late", "too_large", "bad_topic", "too_many_series", "out_of_domain"} {
		if !slices.Contains(list, c) {
			t.Errorf("CONTRACT.md §2 names code %q; RejectCodes lacks it", c)
		}
	}
	// Each call is a new slice: changing one does not change the next.
	list[0] = "changed"
	if RejectCodes()[0] == "changed" {
		t.Error("RejectCodes returns a shared slice")
	}
}

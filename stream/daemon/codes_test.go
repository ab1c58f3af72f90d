package daemon

import (
	"go/ast"
	"go/parser"
	"go/token"
	"path/filepath"
	"strings"
	"testing"
)

// The daemon names reject codes only through package stream's Code…
// constants, the list its metrics start at 0 (stream.RejectCodes): a code
// written out as a string at a reject call would be published and counted
// without a sample at 0 before its first use.
func TestRejectCallsUseTheCodeList(t *testing.T) {
	names, err := filepath.Glob("*.go")
	if err != nil {
		t.Fatal(err)
	}
	fset := token.NewFileSet()
	calls := 0
	for _, name := range names {
		if strings.HasSuffix(name, "_test.go") {
			continue
		}
		f, err := parser.ParseFile(fset, name, nil, 0)
		if err != nil {
			t.Fatal(err)
		}
		ast.Inspect(f, func(n ast.Node) bool {
			call, ok := n.(*ast.CallExpr)
			if !ok {
				return true
			}
			sel, ok := call.Fun.(*ast.SelectorExpr)
			if !ok || sel.Sel.Name != "reject" || len(call.Args) != 5 {
				return true
			}
			calls++
			if lit, ok := call.Args[3].(*ast.BasicLit); ok {
				t.Errorf("%s: reject with the code %s written out; use a stream.Code… constant", fset.Position(lit.Pos()), lit.Value)
			}
			return true
		})
	}
	if calls == 0 {
		t.Fatal("found no reject calls; the test no longer looks at the right code")
	}
}

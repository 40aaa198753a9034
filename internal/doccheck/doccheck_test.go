package doccheck

import (
	"go/ast"
	"go/parser"
	"go/token"
	"io/fs"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

// TestExportedHaveDocComments: every exported function, method, type,
// constant and variable outside tests has a doc comment. A constant or
// variable in a group may share the group's comment; a method of an
// unexported type, and a field, are not checked.
func TestExportedHaveDocComments(t *testing.T) {
	root := filepath.Join("..", "..")
	var missing []string
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() {
			if name := d.Name(); path != root && (strings.HasPrefix(name, ".") || name == "testdata" || name == "node_modules") {
				return filepath.SkipDir
			}
			return nil
		}
		if !strings.HasSuffix(path, ".go") || strings.HasSuffix(path, "_test.go") {
			return nil
		}
		fset := token.NewFileSet()
		f, err := parser.ParseFile(fset, path, nil, parser.ParseComments)
		if err != nil {
			return err
		}
		if f.Name.Name == "main" {
			return nil
		}
		missing = append(missing, undocumented(fset, f)...)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	sort.Strings(missing)
	for _, m := range missing {
		t.Errorf("%s has no doc comment", m)
	}
}

func undocumented(fset *token.FileSet, f *ast.File) []string {
	var out []string
	at := func(n ast.Node, name string) {
		p := fset.Position(n.Pos())
		out = append(out, filepath.ToSlash(p.Filename)[len("../../"):]+": "+name)
	}
	for _, decl := range f.Decls {
		switch d := decl.(type) {
		case *ast.FuncDecl:
			if !d.Name.IsExported() || d.Doc != nil {
				continue
			}
			if d.Recv != nil {
				if !exportedReceiver(d.Recv) {
					continue
				}
				at(d, receiverName(d.Recv)+"."+d.Name.Name)
				continue
			}
			at(d, d.Name.Name)
		case *ast.GenDecl:
			for _, spec := range d.Specs {
				switch s := spec.(type) {
				case *ast.TypeSpec:
					if s.Name.IsExported() && s.Doc == nil && d.Doc == nil {
						at(s, s.Name.Name)
					}
				case *ast.ValueSpec:
					for _, n := range s.Names {
						if n.IsExported() && s.Doc == nil && d.Doc == nil && s.Comment == nil {
							at(n, n.Name)
						}
					}
				}
			}
		}
	}
	return out
}

func receiverName(recv *ast.FieldList) string {
	typ := recv.List[0].Type
	if star, ok := typ.(*ast.StarExpr); ok {
		typ = star.X
	}
	if ix, ok := typ.(*ast.IndexExpr); ok {
		typ = ix.X
	}
	if id, ok := typ.(*ast.Ident); ok {
		return id.Name
	}
	return "?"
}

func exportedReceiver(recv *ast.FieldList) bool {
	return ast.IsExported(receiverName(recv))
}

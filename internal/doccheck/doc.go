// Package doccheck holds a test that every exported identifier of ferry's
// packages has a doc comment, which go vet does not check.
package doccheck

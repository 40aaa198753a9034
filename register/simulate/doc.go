// Package simulate makes a synthetic scenario with known truth.
package simulate

//go:build !purego

package gnss

// puregoBuild is true under the purego build tag (see purego_test.go).
const puregoBuild = false

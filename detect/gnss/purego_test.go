//go:build purego

package gnss

// puregoBuild is true under the purego build tag (the Go twins of the
// AVX kernels): the long statistical tests then run fewer captures.
const puregoBuild = true

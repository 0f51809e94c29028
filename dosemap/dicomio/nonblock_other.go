//go:build !unix

package dicomio

// openNonblock is 0 where opening does not block on special files.
const openNonblock = 0

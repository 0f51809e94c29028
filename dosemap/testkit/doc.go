// Package testkit holds the scaffolding that the tests and benchmarks of
// every package share: the CPU time a benchmark reports beside wall time,
// and the outside DICOM writer (Debian's python3-pydicom) that tests use
// as an independent encoder and as the source of its test files.
//
// It is for tests and benchmarks only: no product code imports it. It
// imports the standard library alone (no Fyne, nothing of dosecover), so
// the tests of any package, dosemap itself included, may import it.
//
// Outside continuous integration a missing python3-pydicom skips the test
// that needs it; with CI=true it fails the test, so the checks against the
// outside writer always run there.
package testkit

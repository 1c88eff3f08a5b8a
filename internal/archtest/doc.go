// Package archtest holds no code, only a test: the layering rule of
// docs/ARCHITECTURE.md ("what may import what"), checked against the
// imports of every package in the module as go/build reads them, with and
// without the rtlsdr build tag.
//
// Each package has a layer (1 foundation, 2 domain, 3 stages, 4 pipelines,
// 5 command). A package may import only packages of lower layers. Inside
// layer 2 the ident family (ident/...) is ordered as well, so its
// sub-packages may import those before them in that order. Tests may also
// import packages of their own layer (a sibling that builds a fixture, as
// survey's tests use sim), never a higher one. The test-support packages
// (internal/testtool, ident/internal/identtest, ident/internal/obstest) may
// be imported by tests only. A package missing from the table fails the
// test, so a new package is placed in a layer when it is added.
package archtest

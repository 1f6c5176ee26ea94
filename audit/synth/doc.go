// Package synth writes synthetic MR images as DICOM Part 10 files, for
// interoperability tests and benchmarks of the network layer, and as the
// seed of the diffusion phantoms the audit will be tested on.
//
// Everything in the files is invented: the hospital, the scanner, the
// patient and the pixels (a smooth head-like ellipse with noise). The output
// is a pure function of the Series it is asked for, Seed included, so a test
// can write the same files on every run and on every machine.
//
// Files are classic MR Image Storage instances written with
// github.com/suyashkumar/dicom's writer, a DICOM implementation independent
// of ours, so that what our network layer sends was not encoded by the code
// under test.
package synth

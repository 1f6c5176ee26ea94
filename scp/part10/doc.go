// Package part10 reads and writes the DICOM Part 10 file envelope: the
// 128-byte File Preamble, the "DICM" prefix and the File Meta Information
// (group 0002), which is always encoded in Explicit VR Little Endian whatever
// the transfer syntax of the data set that follows (PS3.10 7.1).
//
// It exists apart from any general DICOM library because every file that
// `dwiaudit send` touches, and every instance the store receives, passes
// through it: it must be small, allocate only what a length it has checked
// allows, never panic on hostile input, and tell its callers exactly where the
// data set begins so that the data set can be streamed onto an association
// without being parsed.
//
// The package never interprets the data set itself. It is the one Part 10
// codec of the module: the requestor reads files with ReadMetaFile, the store
// writes every received instance with AppendHeader, and the header readers
// take LongLengthVR, the one table of VRs with a 32-bit length, from here.
// So that the store can use it without depending on the network layer, it
// imports only the standard library (deps_test.go).
package part10

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
// The package never interprets the data set itself.
package part10

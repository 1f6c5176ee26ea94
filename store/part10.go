package store

import (
	"bufio"
	"fmt"
	"io"

	"dwiaudit/scp/part10"
)

// The Part 10 envelope (PS3.10 7.1) of every instance file is scp/part10's,
// the one codec of it in the module; that package imports only the
// standard library (its deps test), so the store stays below the network
// layer.

// encodeFileMeta returns the preamble, "DICM" and the File Meta Information
// of an instance file: part10.AppendHeader of the three UIDs and our
// implementation's identity. The UIDs must already have passed checkUID.
// The source AE title is the peer's calling AE title; it is Type 3 (PS3.10
// 7.1 Table 7.1-1), so a title that is not a valid AE value is left out
// rather than failing the C-STORE.
func encodeFileMeta(sopClass, sopInstance, transferSyntax, sourceAE string) ([]byte, error) {
	if !part10.ValidAETitle(sourceAE) {
		sourceAE = ""
	}
	b, err := part10.AppendHeader(nil, part10.Meta{
		MediaStorageSOPClassUID:      sopClass,
		MediaStorageSOPInstanceUID:   sopInstance,
		TransferSyntaxUID:            transferSyntax,
		SourceApplicationEntityTitle: sourceAE,
	})
	if err != nil {
		return nil, fmt.Errorf("store: file meta: %w", err)
	}
	return b, nil
}

// readFileMeta reads the envelope of an instance file with part10.ReadMeta
// and returns its meta and the offset where the data set begins. r is read
// through a small buffer, so its position afterwards is not the offset:
// seek there to read the data set.
func readFileMeta(r io.Reader) (part10.Meta, int64, error) {
	// The meta is a few hundred bytes; 1 KiB reads it in one system call.
	return part10.ReadMeta(bufio.NewReaderSize(r, 1<<10))
}

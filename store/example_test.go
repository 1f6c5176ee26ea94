package store_test

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"time"

	"dwiaudit/audit/synth"
	"dwiaudit/scp/part10"
	"dwiaudit/store"
)

// A data set arrives as a C-STORE would hand it over (no file meta), is
// stored durably, and is found again by SOP instance UID and by series.
// The image is synthetic, of the invented Quellvander Ostmire Hospital.
func Example() {
	tmp, err := os.MkdirTemp("", "store-example-")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(tmp)

	// One synthetic MR image; its data set begins after the file meta.
	paths, err := synth.WriteSeries(filepath.Join(tmp, "in"), synth.Series{
		StudyInstanceUID: "2.25.4242", SeriesInstanceUID: "2.25.4242.1", Slices: 1, Rows: 8, Columns: 8, Seed: 1,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	meta, off, err := part10.ReadMetaFile(paths[0])
	if err != nil {
		fmt.Println(err)
		return
	}
	file, err := os.ReadFile(paths[0])
	if err != nil {
		fmt.Println(err)
		return
	}

	// Describe reads a received file's header for the index; the node
	// wires the audit's header reader here. This example knows its one
	// image already.
	describe := func(path string) (store.Attributes, error) {
		return store.Attributes{StudyInstanceUID: "2.25.4242", SeriesInstanceUID: "2.25.4242.1", Modality: "MR", SeriesNumber: 1}, nil
	}
	s, err := store.Open(store.Options{Dir: filepath.Join(tmp, "data"), Location: time.UTC, Describe: describe})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer s.Close()

	ref, err := s.Put(context.Background(), store.PutRequest{
		SOPClassUID:       meta.MediaStorageSOPClassUID,
		SOPInstanceUID:    meta.MediaStorageSOPInstanceUID,
		TransferSyntaxUID: meta.TransferSyntaxUID,
		CallingAETitle:    "QOH_MR1",
		ScannerLabel:      "qoh-mr1",
	}, bytes.NewReader(file[off:]))
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("version", ref.Version, "duplicate", ref.Duplicate == store.DupNone)

	in, err := s.Instance(meta.MediaStorageSOPInstanceUID)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("series", in.SeriesInstanceUID, "from", in.CallingAETitle, "as", in.ScannerLabel)

	// The stored file is a Part 10 file again: our file meta, then the
	// data set byte for byte.
	r, err := s.OpenInstance(in.SOPInstanceUID)
	if err != nil {
		fmt.Println(err)
		return
	}
	stored, err := io.ReadAll(r)
	r.Close()
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("data set kept byte for byte:", bytes.Equal(stored[in.DataSetOffset:], file[off:]))

	series, err := s.Series("2.25.4242.1")
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("series", series.SeriesNumber, "holds", series.Instances, "instance of", series.Modality)
	// Output:
	// version 1 duplicate true
	// series 2.25.4242.1 from QOH_MR1 as qoh-mr1
	// data set kept byte for byte: true
	// series 1 holds 1 instance of MR
}

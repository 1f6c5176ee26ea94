package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"testing"

	"dwiaudit/config"
	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
	"dwiaudit/store"
)

func TestStoreStatusMapsEveryStoreErrorToOneStatus(t *testing.T) {
	tests := []struct {
		name string
		err  error
		want dimse.Status
	}{
		{"success stays success", nil, dimse.StatusSuccess},
		// PS3.4 B.2.3 Table B.2-1: A7xx Refused: Out of Resources.
		{"a disk below its floor is out of resources", fmt.Errorf("%w: 10 bytes free", store.ErrOutOfSpace), dimse.StatusOutOfResources},
		// PS3.4 B.2.3 Table B.2-1: A9xx Error: Data Set does not match SOP Class.
		{"a UID breaking the UI rules does not match the SOP class", fmt.Errorf("%w: SOP instance UID %q", store.ErrInvalidUID, "../x"), dimse.StatusDataSetDoesNotMatchSOPClass},
		// PS3.4 B.2.3 Table B.2-1: Cxxx Error: Cannot understand.
		{"an unreadable header cannot be understood", fmt.Errorf("%w: bad", store.ErrUnreadable), dimse.StatusCannotUnderstand},
		// PS3.7 C.5: 0110H Processing failure.
		{"a cut stream is a processing failure", fmt.Errorf("store: reading data set: %w", fmt.Errorf("%w: peer aborted", scp.ErrIncomplete)), dimse.StatusProcessingFailure},
		{"a closing store is a processing failure", store.ErrClosed, dimse.StatusProcessingFailure},
		{"any other error is a processing failure", errors.New("disk on fire"), dimse.StatusProcessingFailure},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			status, comment := dimse.StatusOf(storeStatus(tt.err))
			if status != tt.want {
				t.Errorf("status %v, want %v", status, tt.want)
			}
			if tt.err != nil && comment == "" {
				t.Error("no Error Comment for a failure")
			}
			if tt.err != nil && !errors.Is(storeStatus(tt.err), tt.err) {
				t.Error("the status error does not wrap the store's error")
			}
		})
	}
}

// recordingPutter keeps the last PutRequest and its data.
type recordingPutter struct {
	req  store.PutRequest
	data []byte
	err  error
}

func (p *recordingPutter) Put(ctx context.Context, req store.PutRequest, data io.Reader) (store.InstanceRef, error) {
	p.req = req
	p.data, _ = io.ReadAll(data)
	return store.InstanceRef{SOPInstanceUID: req.SOPInstanceUID}, p.err
}

func TestIngestPassesTheRequestAndTheScannerLabelToTheStore(t *testing.T) {
	p := &recordingPutter{}
	h := &ingest{store: p, peers: config.NewPeerTable([]config.Peer{{AETitle: "QOH_MR1", Scanner: "qoh-mr1-1.5t"}})}
	err := h.HandleStore(context.Background(), &scp.StoreRequest{
		CallingAETitle: "QOH_MR1", SOPClassUID: scp.MRImageStorage, SOPInstanceUID: "2.25.5",
		TransferSyntaxUID: scp.ExplicitVRLittleEndian, Data: bytes.NewReader([]byte("data set")),
	})
	if err != nil {
		t.Fatal(err)
	}
	want := store.PutRequest{SOPClassUID: scp.MRImageStorage, SOPInstanceUID: "2.25.5", TransferSyntaxUID: scp.ExplicitVRLittleEndian,
		CallingAETitle: "QOH_MR1", ScannerLabel: "qoh-mr1-1.5t"}
	if p.req != want || string(p.data) != "data set" {
		t.Errorf("store got %+v %q, want %+v", p.req, p.data, want)
	}
	p.err = store.ErrOutOfSpace
	err = h.HandleStore(context.Background(), &scp.StoreRequest{SOPInstanceUID: "2.25.6", Data: bytes.NewReader(nil)})
	if st, _ := dimse.StatusOf(err); st != dimse.StatusOutOfResources {
		t.Errorf("status %v, want %v", st, dimse.StatusOutOfResources)
	}
}

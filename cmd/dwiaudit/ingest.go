package main

import (
	"context"
	"errors"
	"io"
	"time"

	"dwiaudit/config"
	"dwiaudit/scp"
	"dwiaudit/scp/dimse"
	"dwiaudit/store"
)

// instancePutter is what the ingest adapter needs of the store.
type instancePutter interface {
	Put(ctx context.Context, req store.PutRequest, data io.Reader) (store.InstanceRef, error)
}

// instanceLooker finds the study and series of a stored instance.
type instanceLooker interface {
	Instance(sopUID string) (store.Instance, error)
}

// auditNotifier is told about each committed instance (audit.Pipeline).
type auditNotifier interface {
	Notify(seriesUID, studyUID string, at time.Time)
}

// studyLooker reads a stored study: the Station Name of a series, for
// the metrics' scanner label of a peer without a configured one, and the
// study's identifiers that label must never hold.
type studyLooker interface {
	Study(uid string) (store.Study, error)
}

// instanceObserver is told about each instance stored (metrics.Metrics).
type instanceObserver interface {
	InstanceStored(scanner string, bytes int64, took time.Duration, never ...string)
}

// ingest is the acceptor's StoreHandler: it streams each C-STORE data set
// into the store, which returns only once the instance is durable, so a
// success status is never sent for something the node does not have.
// Each instance committed (not an identical duplicate, which changes
// nothing to audit) is then told to the audit pipeline, when there is
// one.
type ingest struct {
	store     instancePutter
	peers     *config.PeerTable
	instances instanceLooker   // with audit or metrics
	audit     auditNotifier    // nil: no audit
	studies   studyLooker      // with metrics
	metrics   instanceObserver // nil: no metrics
}

// HandleStore implements scp.StoreHandler.
func (h *ingest) HandleStore(ctx context.Context, req *scp.StoreRequest) error {
	start := time.Now()
	label := h.peers.Scanner(req.CallingAETitle)
	ref, err := h.store.Put(ctx, store.PutRequest{
		SOPClassUID:       req.SOPClassUID,
		SOPInstanceUID:    req.SOPInstanceUID,
		TransferSyntaxUID: req.TransferSyntaxUID,
		CallingAETitle:    req.CallingAETitle,
		ScannerLabel:      label,
	}, req.Data)
	if err != nil || (h.audit == nil && h.metrics == nil) {
		return storeStatus(err)
	}
	// The store marked the series pending in the commit itself; the
	// pipeline only (re)starts its study's settle timer.
	at := time.Now()
	in, lerr := h.instances.Instance(ref.SOPInstanceUID)
	if lerr == nil && h.audit != nil && ref.Duplicate != store.DupIdentical {
		h.audit.Notify(in.SeriesInstanceUID, in.StudyInstanceUID, at)
	}
	if h.metrics != nil {
		var size int64
		var never []string
		if lerr == nil {
			size = in.Size - in.DataSetOffset
			never = []string{in.StudyInstanceUID, in.SeriesInstanceUID, in.SOPInstanceUID}
			if label == "" && h.studies != nil {
				if st, serr := h.studies.Study(in.StudyInstanceUID); serr == nil {
					never = append(never, st.PatientID, st.PatientName, st.AccessionNumber)
					for _, se := range st.Series {
						if se.SeriesInstanceUID == in.SeriesInstanceUID {
							label = se.StationName // metrics.Labels sanitises and bounds it
						}
					}
				}
			}
		}
		h.metrics.InstanceStored(label, size, at.Sub(start), never...)
	}
	return nil
}

// storeStatus is the one place where a store error becomes the DIMSE
// status of a C-STORE-RSP (dimse.StatusOf then reads it). The comment
// goes to the peer, so it names the problem and never a patient.
func storeStatus(err error) error {
	switch {
	case err == nil:
		return nil
	case errors.Is(err, scp.ErrIncomplete):
		// The peer stopped before the last fragment; nothing was kept.
		// The association is usually gone, so this rarely reaches it.
		return dimse.NewStatusError(dimse.StatusProcessingFailure, "data set incomplete; nothing stored", err)
	case errors.Is(err, store.ErrOutOfSpace):
		// PS3.4 B.2.3 Table B.2-1: A7xx "Refused: Out of Resources".
		return dimse.NewStatusError(dimse.StatusOutOfResources, "out of disk space; nothing stored, try again later", err)
	case errors.Is(err, store.ErrInvalidUID):
		// A UID breaking the UI rules (PS3.5 9.1) is a data set the
		// IOD does not allow: PS3.4 B.2.3 Table B.2-1, A9xx "Error:
		// Data Set does not match SOP Class". The store's message
		// says which UID.
		return dimse.Errorf(dimse.StatusDataSetDoesNotMatchSOPClass, "%w", err)
	case errors.Is(err, store.ErrUnreadable):
		// PS3.4 B.2.3 Table B.2-1: Cxxx "Error: Cannot understand".
		return dimse.NewStatusError(dimse.StatusCannotUnderstand, "cannot read the data set header; nothing stored", err)
	}
	// Closed (shutting down), read-only, I/O errors: PS3.7 C.5, 0110H
	// "Processing failure".
	return dimse.NewStatusError(dimse.StatusProcessingFailure, "storage failed; nothing stored", err)
}

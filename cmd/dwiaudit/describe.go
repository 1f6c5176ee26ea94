package main

import (
	"dwiaudit/audit/header"
	"dwiaudit/store"
)

// describeInstance is the store's Options.Describe: it reads the header
// of a Part 10 file with the audit's header reader (which checks the
// transfer syntax, bounds every length and recovers the parser's panics)
// and keeps what the index needs.
func describeInstance(path string) (store.Attributes, error) {
	id, err := header.ReadFile(path)
	if err != nil {
		return store.Attributes{}, err
	}
	return store.Attributes{
		StudyInstanceUID:    id.StudyInstanceUID,
		SeriesInstanceUID:   id.SeriesInstanceUID,
		StudyDate:           id.StudyDate,
		StudyTime:           id.StudyTime,
		AccessionNumber:     id.AccessionNumber,
		PatientID:           id.PatientID,
		PatientName:         id.PatientName,
		Modality:            id.Modality,
		SeriesDescription:   id.SeriesDescription,
		StationName:         id.StationName,
		DeviceSerialNumber:  id.DeviceSerialNumber,
		InstitutionName:     id.InstitutionName,
		Manufacturer:        id.Manufacturer,
		FrameOfReferenceUID: id.FrameOfReferenceUID,
		SeriesNumber:        id.SeriesNumber,
		InstanceNumber:      id.InstanceNumber,
	}, nil
}

package seglog

import (
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"io"
)

const (
	// headerSize is the fixed part of a record before the UID.
	headerSize = 20
	// maxUID is the longest UID: PS3.5 9.1 allows 64 characters.
	maxUID = 64
	// MaxPayload bounds one record's payload: larger than any Enhanced MR
	// object a scanner sends (hundreds of MiB), small enough that a
	// damaged length field is recognised as impossible.
	MaxPayload = 1 << 34
	// crcChunk is the read size when a checksum is verified from a file.
	crcChunk = 256 << 10
)

// magic opens every record.
var magic = [4]byte{'D', 'W', 'R', '1'}

// castagnoli is the CRC-32C table (hardware-accelerated on amd64/arm64).
var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// Pos names a record: its segment and the byte offset of its header.
type Pos struct {
	Segment uint64
	Offset  int64
}

// String renders a position as segment:offset.
func (p Pos) String() string { return fmt.Sprintf("%d:%d", p.Segment, p.Offset) }

// After is the position just after a record of uid and n payload bytes
// at p: the replay mark once that record is applied (Entry.Next).
func (p Pos) After(uid string, n int64) Pos {
	return Pos{p.Segment, p.Offset + recordSize(uid, n)}
}

// Less orders positions by segment, then offset.
func (p Pos) Less(q Pos) bool {
	if p.Segment != q.Segment {
		return p.Segment < q.Segment
	}
	return p.Offset < q.Offset
}

// Entry describes one record found by replay.
type Entry struct {
	Pos  Pos
	UID  string
	Size int64 // payload bytes
	Next Pos   // the position just after the record: a replay mark
}

// recordSize is the whole record's length on disk.
func recordSize(uid string, payload int64) int64 {
	return headerSize + int64(len(uid)) + payload
}

// encodeHeader fills hdr (headerSize+len(uid) bytes) for a record of uid
// and payload, checksum included.
func encodeHeader(hdr []byte, uid string, payload []byte) {
	copy(hdr[0:4], magic[:])
	binary.LittleEndian.PutUint16(hdr[8:10], uint16(len(uid)))
	binary.LittleEndian.PutUint16(hdr[10:12], 0)
	binary.LittleEndian.PutUint64(hdr[12:20], uint64(len(payload)))
	copy(hdr[headerSize:], uid)
	c := crc32.Update(headerCRC(hdr), castagnoli, payload)
	binary.LittleEndian.PutUint32(hdr[4:8], c)
}

// headerCRC starts a record's checksum: the header bytes other than the
// CRC field, then the UID; the payload follows.
func headerCRC(hdrAndUID []byte) uint32 {
	c := crc32.Update(0, castagnoli, hdrAndUID[0:4])
	return crc32.Update(c, castagnoli, hdrAndUID[8:])
}

// header is a decoded record header.
type header struct {
	crc     uint32
	uidLen  int
	payload int64
}

// decodeHeader checks the fixed header's magic, flags and lengths.
func decodeHeader(b []byte) (header, error) {
	if [4]byte(b[0:4]) != magic {
		return header{}, fmt.Errorf("bad magic %q", b[0:4])
	}
	h := header{
		crc:     binary.LittleEndian.Uint32(b[4:8]),
		uidLen:  int(binary.LittleEndian.Uint16(b[8:10])),
		payload: int64(binary.LittleEndian.Uint64(b[12:20])),
	}
	if f := binary.LittleEndian.Uint16(b[10:12]); f != 0 {
		return header{}, fmt.Errorf("unknown flags %#x", f)
	}
	if h.uidLen < 1 || h.uidLen > maxUID {
		return header{}, fmt.Errorf("UID length %d", h.uidLen)
	}
	if h.payload < 0 || h.payload > MaxPayload {
		return header{}, fmt.Errorf("payload length %d", uint64(h.payload))
	}
	return h, nil
}

// readRecord reads and verifies the record at off in f, whose length is
// size: the header, the UID, and the payload read through once for the
// checksum. buf is scratch for that read.
func readRecord(f io.ReaderAt, off, size int64, buf []byte) (header, string, error) {
	if size-off < headerSize {
		return header{}, "", badRecord{fmt.Sprintf("short header: %d bytes left", size-off)}
	}
	var hb [headerSize + maxUID]byte
	if _, err := f.ReadAt(hb[:headerSize], off); err != nil {
		return header{}, "", fmt.Errorf("read header: %w", err)
	}
	h, err := decodeHeader(hb[:headerSize])
	if err != nil {
		return header{}, "", badRecord{err.Error()}
	}
	if end := off + headerSize + int64(h.uidLen) + h.payload; end > size || end < off {
		return header{}, "", badRecord{fmt.Sprintf("record of %d payload bytes runs past the end (%d)", h.payload, size)}
	}
	hu := hb[:headerSize+h.uidLen]
	if _, err := f.ReadAt(hu[headerSize:], off+headerSize); err != nil {
		return header{}, "", fmt.Errorf("read UID: %w", err)
	}
	got, err := crcOf(headerCRC(hu), io.NewSectionReader(f, off+int64(len(hu)), h.payload), buf)
	if err != nil {
		return header{}, "", fmt.Errorf("read payload: %w", err)
	}
	if got != h.crc {
		return header{}, "", badRecord{fmt.Sprintf("checksum %08x, header says %08x", got, h.crc)}
	}
	return h, string(hu[headerSize:]), nil
}

// badRecord is a record that fails its checks, as opposed to a read
// that failed: only the first may be cut off as a torn tail.
type badRecord struct{ why string }

func (b badRecord) Error() string { return b.why }

// crcOf reads r to its end and returns the CRC-32C c continued over it.
func crcOf(c uint32, r io.Reader, buf []byte) (uint32, error) {
	for {
		n, err := r.Read(buf)
		c = crc32.Update(c, castagnoli, buf[:n])
		if err == io.EOF {
			return c, nil
		}
		if err != nil {
			return 0, err
		}
	}
}

package scp

import (
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"time"

	"dwiaudit/scp/dimse"
	"dwiaudit/scp/pdu"
)

const (
	// maxCommandLength bounds a reassembled command set. A C-STORE-RQ is
	// about 150 bytes; 64 KiB leaves room for any command PS3.7 defines
	// while keeping a hostile peer from growing the buffer.
	maxCommandLength = 64 << 10

	// pdvOverhead is what one PDV item adds to the P-DATA-TF variable
	// field: item length (4), context ID (1), message control header (1)
	// (PS3.8 9.3.5.1 Table 9-23).
	pdvOverhead = 6

	// pduHeaderLength is type, reserved and length (PS3.8 9.3.1).
	pduHeaderLength = 6

	// defaultSendPDULength is used when the peer advertises no maximum
	// (Maximum Length 0 means unlimited, PS3.8 D.1).
	defaultSendPDULength = 256 << 10
)

// msgConn carries DIMSE messages over one association, for either role.
// It is owned by the goroutine serving the association.
type msgConn struct {
	nc net.Conn
	r  *pdu.Reader

	// peerMax is the peer's Maximum Length (PS3.8 D.1): the largest
	// P-DATA-TF variable field we may send.
	peerMax uint32

	idleTimeout  time.Duration // read deadline for each PDU
	writeTimeout time.Duration // write deadline for each PDU

	// cur and next hold the P-DATA-TF being consumed: a PDU may carry the
	// end of a command and the start of its data set (PS3.8 E.2 allows
	// it), so PDVs are handed out one by one.
	cur  *pdu.PDataTF
	next int

	// pending is a non-P-DATA PDU met while reading a message (A-ABORT,
	// A-RELEASE-RQ, ...); the state machine handles it next.
	pending pdu.PDU

	cmdBuf []byte // reassembled command set
	wbuf   []byte // outgoing PDU buffer, reused

	bytesIn int64 // data-set bytes received, for the association log
}

func newMsgConn(nc net.Conn, ourMax uint32, idle, write time.Duration) *msgConn {
	return &msgConn{
		nc:           nc,
		r:            pdu.NewReader(nc, ourMax),
		idleTimeout:  idle,
		writeTimeout: write,
	}
}

// readPDU reads the next PDU with the idle deadline.
func (m *msgConn) readPDU() (pdu.PDU, error) {
	if m.idleTimeout > 0 {
		m.nc.SetReadDeadline(time.Now().Add(m.idleTimeout))
	}
	return m.r.Next()
}

// writePDU encodes and writes one PDU with the write deadline.
func (m *msgConn) writePDU(p pdu.PDU) error {
	b, err := pdu.Encode(p)
	if err != nil {
		return err
	}
	return m.write(b)
}

func (m *msgConn) write(b []byte) error {
	if m.writeTimeout > 0 {
		m.nc.SetWriteDeadline(time.Now().Add(m.writeTimeout))
	}
	_, err := m.nc.Write(b)
	return err
}

// nextPDV returns the next PDV of the stream. A PDU other than P-DATA-TF
// is returned as ctrl (and the PDV is nil). The PDV's data aliases the
// reader's buffer and is valid until the next call.
func (m *msgConn) nextPDV() (pdv *pdu.PDV, ctrl pdu.PDU, err error) {
	for m.cur == nil || m.next >= len(m.cur.Items) {
		m.cur, m.next = nil, 0
		p, err := m.readPDU()
		if err != nil {
			return nil, nil, err
		}
		pd, ok := p.(*pdu.PDataTF)
		if !ok {
			return nil, p, nil
		}
		m.cur = pd
	}
	pdv = &m.cur.Items[m.next]
	m.next++
	return pdv, nil, nil
}

// buffered reports whether PDVs of the current P-DATA-TF are unread.
func (m *msgConn) buffered() bool { return m.cur != nil && m.next < len(m.cur.Items) }

// readCommand reassembles the next command set. It returns ctrl when a PDU
// other than P-DATA-TF arrives between messages (release, abort, ...).
// first is called once the first fragment of the command is in, so the
// acceptor can mark the association busy.
func (m *msgConn) readCommand(first func()) (ctxID byte, cmd *dimse.Command, ctrl pdu.PDU, err error) {
	m.cmdBuf = m.cmdBuf[:0]
	started := false
	for {
		pdv, ctrl, err := m.nextPDV()
		if err != nil {
			return 0, nil, nil, err
		}
		if ctrl != nil {
			if started {
				m.pending = ctrl
				return 0, nil, nil, fmt.Errorf("%w: %v inside a command", ErrIncomplete, ctrl.Type())
			}
			return 0, nil, ctrl, nil
		}
		if !pdv.Command {
			return 0, nil, nil, protocolErrorf(pdu.AbortReasonUnexpectedPDUParameter, "data fragment on context %d before its command", pdv.ContextID)
		}
		if !started {
			started, ctxID = true, pdv.ContextID
			if first != nil {
				first()
			}
		} else if pdv.ContextID != ctxID {
			return 0, nil, nil, protocolErrorf(pdu.AbortReasonUnexpectedPDUParameter, "command fragment on context %d, expected %d", pdv.ContextID, ctxID)
		}
		if len(m.cmdBuf)+len(pdv.Data) > maxCommandLength {
			return 0, nil, nil, protocolErrorf(pdu.AbortReasonInvalidPDUParameterValue, "command set longer than %d bytes", maxCommandLength)
		}
		m.cmdBuf = append(m.cmdBuf, pdv.Data...)
		if pdv.Last {
			break
		}
	}
	cmd, err = dimse.Decode(m.cmdBuf)
	if err != nil {
		return 0, nil, nil, protocolErrorf(pdu.AbortReasonInvalidPDUParameterValue, "%v", err)
	}
	return ctxID, cmd, nil, nil
}

// dataReader streams one data set out of P-DATA-TF fragments. It pulls
// PDUs from the connection only when the caller reads, so a slow handler
// slows the peer through TCP flow control instead of filling memory.
type dataReader struct {
	m     *msgConn
	ctxID byte
	rest  []byte // unread part of the current fragment (aliases the PDU buffer)
	last  bool   // the current fragment is the last one
	err   error  // sticky: io.EOF after the last fragment, or the failure
}

// fill makes d.rest non-empty, or returns io.EOF after the last fragment,
// or the failure (wrapping ErrIncomplete).
func (d *dataReader) fill() error {
	for len(d.rest) == 0 {
		if d.err != nil {
			return d.err
		}
		if d.last {
			d.err = io.EOF
			return io.EOF
		}
		pdv, ctrl, err := d.m.nextPDV()
		switch {
		case err != nil:
			d.err = fmt.Errorf("%w: %w", ErrIncomplete, err)
		case ctrl != nil:
			d.m.pending = ctrl
			d.err = fmt.Errorf("%w: peer sent %v before the last fragment", ErrIncomplete, ctrl.Type())
		case pdv.Command:
			d.err = fmt.Errorf("%w: %w", ErrIncomplete,
				protocolErrorf(pdu.AbortReasonUnexpectedPDUParameter, "command fragment inside a data set"))
		case pdv.ContextID != d.ctxID:
			d.err = fmt.Errorf("%w: %w", ErrIncomplete,
				protocolErrorf(pdu.AbortReasonUnexpectedPDUParameter, "data fragment on context %d, expected %d", pdv.ContextID, d.ctxID))
		default:
			d.rest, d.last = pdv.Data, pdv.Last
			d.m.bytesIn += int64(len(pdv.Data))
		}
	}
	return nil
}

func (d *dataReader) Read(p []byte) (int, error) {
	if len(p) == 0 {
		return 0, nil
	}
	if err := d.fill(); err != nil {
		return 0, err
	}
	n := copy(p, d.rest)
	d.rest = d.rest[n:]
	return n, nil
}

// WriteTo lets io.Copy move fragments straight to w without an
// intermediate buffer.
func (d *dataReader) WriteTo(w io.Writer) (int64, error) {
	var total int64
	for {
		if err := d.fill(); err == io.EOF {
			return total, nil
		} else if err != nil {
			return total, err
		}
		n, err := w.Write(d.rest)
		total += int64(n)
		d.rest = d.rest[n:]
		if err != nil {
			return total, err
		}
	}
}

// complete reports whether the whole data set was received.
func (d *dataReader) complete() bool {
	return d.err == io.EOF || (d.err == nil && d.last && len(d.rest) == 0)
}

// drain consumes what the handler left unread. It returns nil when the
// data set ended properly.
func (d *dataReader) drain() error {
	_, err := io.Copy(io.Discard, d)
	return err
}

// maxFragment is the most data one PDV may carry towards the peer.
func (m *msgConn) maxFragment() int {
	max := m.peerMax
	if max == 0 || max > MaxPDULengthCap {
		max = defaultSendPDULength
	}
	if max <= pdvOverhead {
		// A peer advertising less than a PDV header cannot receive
		// anything; send the smallest fragments possible.
		return 1
	}
	return int(max) - pdvOverhead
}

// writeCommand sends a command set, fragmented by the peer's maximum.
func (m *msgConn) writeCommand(ctxID byte, cmd *dimse.Command) error {
	b, err := cmd.Encode()
	if err != nil {
		return err
	}
	max := m.maxFragment()
	for len(b) > 0 {
		n := min(len(b), max)
		m.wbuf = pdu.AppendPDataHeader(m.wbuf[:0], ctxID, true, n == len(b), n)
		m.wbuf = append(m.wbuf, b[:n]...)
		if err := m.write(m.wbuf); err != nil {
			return err
		}
		b = b[n:]
	}
	return nil
}

// writeData sends a data set read from r, fragmented by the peer's
// maximum; the last fragment is marked (PS3.8 E.2). One byte is read
// ahead so that a fragment that ends exactly at the end of r is known to
// be the last one.
func (m *msgConn) writeData(ctxID byte, r io.Reader) (int64, error) {
	max := m.maxFragment()
	const hdr = pduHeaderLength + pdvOverhead
	if cap(m.wbuf) < hdr+max+1 {
		m.wbuf = make([]byte, hdr+max+1)
	}
	buf := m.wbuf[:hdr+max+1]
	var total int64
	carry := 0 // bytes already in buf[hdr:] from the look-ahead
	for {
		n, err := io.ReadFull(r, buf[hdr+carry:hdr+max+1])
		n += carry
		last := false
		switch {
		case err == io.EOF || err == io.ErrUnexpectedEOF:
			last = true
		case err != nil:
			return total, err
		}
		send := n
		if !last {
			send = max // keep the look-ahead byte for the next fragment
		}
		pdu.AppendPDataHeader(buf[:0], ctxID, false, last, send)
		if err := m.write(buf[:hdr+send]); err != nil {
			return total, err
		}
		total += int64(send)
		if last {
			return total, nil
		}
		buf[hdr] = buf[hdr+max]
		carry = 1
	}
}

// isTimeout reports whether err is a deadline expiry.
func isTimeout(err error) bool {
	var ne net.Error
	return errors.Is(err, os.ErrDeadlineExceeded) || (errors.As(err, &ne) && ne.Timeout())
}

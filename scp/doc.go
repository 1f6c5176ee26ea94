// Package scp is dwiaudit's DICOM network layer: the upper layer of PS3.8
// and the DIMSE services C-ECHO and C-STORE of PS3.7, in both roles.
//
// The parts, bottom up:
//
//   - scp/pdu encodes and decodes the seven PDUs of PS3.8 9.3 with bounded
//     reads; scp/dimse encodes and decodes command sets (PS3.7 9.3, E);
//     scp/part10 reads and writes the Part 10 file envelope (PS3.10 7.1).
//   - syntax.go holds the SOP classes and transfer syntaxes we accept and
//     the acceptor's presentation-context negotiation (PS3.8 9.3.3.2).
//   - message.go reassembles DIMSE messages from P-DATA-TF fragments
//     (PS3.8 9.3.5, E.2) and writes them fragmented by the peer's maximum
//     length. The data set of a C-STORE is never held whole: it reaches the
//     handler as an io.Reader that pulls PDUs from the connection on demand,
//     so memory per association is bounded by one PDU.
//   - assoc.go is the acceptor's state machine for one connection
//     (PS3.8 9.2); server.go is Server, shaped like net/http.Server
//     (Serve, Shutdown, Close, ErrServerClosed).
//   - client.go is the requestor (Dialer, Association); send.go sends
//     Part 10 files over one or more associations.
//
// The package knows nothing about diffusion, storage or auditing: a
// StoreHandler given to Server decides what happens to each data set and
// which DIMSE status is returned.
package scp

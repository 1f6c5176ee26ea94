package scp

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"dwiaudit/scp/dimse"
	"dwiaudit/scp/part10"
	"dwiaudit/scp/pdu"
)

// Defaults and limits of the acceptor.
const (
	DefaultAETitle = "DWIAUDIT"

	// DefaultMaxPDULength is the Maximum Length we advertise (PS3.8 D.1):
	// 256 KiB keeps per-association memory small while making PDU
	// overhead negligible for 128 KiB-plus images.
	DefaultMaxPDULength = 256 << 10

	// MaxPDULengthCap is the largest Maximum Length we accept in
	// configuration: every association may hold one PDU of this size.
	MaxPDULengthCap = 16 << 20

	// MinPDULength is the smallest Maximum Length we accept in
	// configuration; smaller PDUs only add overhead (DCMTK's tools refuse
	// less than 4096 too, from memory).
	MinPDULength = 4096

	// DefaultARTIMTimeout bounds the wait for A-ASSOCIATE-RQ after a
	// connection opens and for the peer to close after a release or
	// reject (PS3.8 9.1.5 leaves the value local; 30 s is common
	// practice).
	DefaultARTIMTimeout = 30 * time.Second

	// DefaultIdleTimeout bounds the silence between PDUs of an
	// association. Scanners send a series in a burst; two minutes of
	// nothing means the sender is gone.
	DefaultIdleTimeout = 2 * time.Minute

	// DefaultWriteTimeout bounds one PDU write to a peer that stopped
	// reading.
	DefaultWriteTimeout = 30 * time.Second

	// DefaultMaxAssociations is the number of concurrent associations
	// accepted before new ones get rejected-transient.
	DefaultMaxAssociations = 32

	// maxDrainAfterClose bounds what we read from a peer while waiting for
	// it to close after A-ABORT, A-ASSOCIATE-RJ or A-RELEASE-RP.
	maxDrainAfterClose = 1 << 20

	// shutdownPollInterval is how often Shutdown looks for associations
	// that went idle.
	shutdownPollInterval = 10 * time.Millisecond

	// ImplementationClassUID and ImplementationVersionName identify
	// dwiaudit in A-ASSOCIATE-RQ/AC (PS3.7 D.3.3.2), the same values as in
	// the file meta we write.
	ImplementationClassUID    = part10.ImplementationClassUID
	ImplementationVersionName = part10.ImplementationVersionName
)

// StoreRequest is one C-STORE as the handler sees it.
type StoreRequest struct {
	CallingAETitle    string
	CalledAETitle     string
	RemoteAddr        net.Addr
	SOPClassUID       string // Affected SOP Class UID (0000,0002)
	SOPInstanceUID    string // Affected SOP Instance UID (0000,1000)
	TransferSyntaxUID string // of the presentation context
	MessageID         uint16
	Priority          dimse.Priority

	// Data streams the data set exactly as received (no file meta). A
	// Read that fails wraps ErrIncomplete: the peer did not send the
	// whole object, and nothing read from it may be kept.
	Data io.Reader
}

// A StoreHandler takes the data set of a C-STORE. It returns nil for
// success or an error; dimse.StatusOf turns the error into the status of
// the C-STORE-RSP (a *dimse.StatusError chooses it exactly). A handler
// that does not read Data to the end is fine: the rest is discarded.
type StoreHandler interface {
	HandleStore(ctx context.Context, req *StoreRequest) error
}

// StoreHandlerFunc adapts a function to StoreHandler.
type StoreHandlerFunc func(ctx context.Context, req *StoreRequest) error

// HandleStore calls f.
func (f StoreHandlerFunc) HandleStore(ctx context.Context, req *StoreRequest) error {
	return f(ctx, req)
}

// Server is a DICOM acceptor (SCP) for Verification and storage. Its
// exported fields are configuration; set them before Serve and do not
// change them after.
type Server struct {
	AETitle string // our AE title; the called AE title must match it (PS3.8 9.3.4)

	// AllowedCallingAETitles lists the peers that may associate; empty
	// means any.
	AllowedCallingAETitles []string

	// AllowCalling, if set, is asked after AllowedCallingAETitles passes:
	// it may refuse a calling AE title from a given network address (for
	// per-peer source networks). A refusal is answered like an unknown
	// calling AE title (PS3.8 9.3.4: source 1, reason 3).
	AllowCalling func(callingAE string, remote net.Addr) bool

	MaxAssociations int           // concurrent associations; 0 means DefaultMaxAssociations
	ARTIMTimeout    time.Duration // 0 means DefaultARTIMTimeout
	IdleTimeout     time.Duration // 0 means DefaultIdleTimeout
	WriteTimeout    time.Duration // 0 means DefaultWriteTimeout
	MaxPDULength    uint32        // 0 means DefaultMaxPDULength

	// StorageSOPClasses are the storage SOP classes accepted; nil means
	// DefaultStorageSOPClasses. AcceptAllStorage accepts every storage
	// SOP class instead.
	StorageSOPClasses []string
	AcceptAllStorage  bool

	// Handler receives C-STOREs. Without one, storage contexts are
	// rejected and only Verification is offered.
	Handler StoreHandler

	// Logger gets one line per association; nil discards.
	Logger *slog.Logger

	// OnAssociation, if set, is called once per finished association with
	// its summary (for metrics). It must not block.
	OnAssociation func(AssociationSummary)

	inShutdown atomic.Bool

	mu        sync.Mutex // guards the fields below
	listeners map[*net.Listener]struct{}
	conns     map[*conn]struct{}
	assocs    int // associations past A-ASSOCIATE-AC, counted against MaxAssociations
}

// AssociationSummary describes one finished association, for logs and
// metrics. It carries no patient data.
type AssociationSummary struct {
	Remote        string
	CallingAE     string
	CalledAE      string
	Result        string // "released", "aborted-by-peer", "aborted", "rejected", "timeout", "closed", "shutdown"
	Detail        string // reject or abort reason, error text
	Instances     int    // C-STOREs answered with success or warning
	Failures      int    // C-STOREs answered with a failure status
	Echoes        int
	Bytes         int64 // data-set bytes received
	Duration      time.Duration
	StoreStatuses map[dimse.Status]int
}

func (s *Server) logger() *slog.Logger {
	if s.Logger == nil {
		return slog.New(slog.DiscardHandler)
	}
	return s.Logger
}

func (s *Server) maxPDU() uint32 {
	if s.MaxPDULength == 0 {
		return DefaultMaxPDULength
	}
	return s.MaxPDULength
}

func orDefault(d, def time.Duration) time.Duration {
	if d <= 0 {
		return def
	}
	return d
}

func (s *Server) maxAssocs() int {
	if s.MaxAssociations <= 0 {
		return DefaultMaxAssociations
	}
	return s.MaxAssociations
}

// Validate reports every problem with the server's configuration at once.
func (s *Server) Validate() error {
	var errs []error
	if err := ValidateAETitle(s.aeTitle()); err != nil {
		errs = append(errs, fmt.Errorf("AETitle: %w", err))
	}
	for i, ae := range s.AllowedCallingAETitles {
		if err := ValidateAETitle(ae); err != nil {
			errs = append(errs, fmt.Errorf("AllowedCallingAETitles[%d]: %w", i, err))
		}
	}
	if m := s.MaxPDULength; m != 0 && (m < MinPDULength || m > MaxPDULengthCap) {
		errs = append(errs, fmt.Errorf("MaxPDULength: %d is outside %d..%d", m, MinPDULength, MaxPDULengthCap))
	}
	if s.MaxAssociations < 0 {
		errs = append(errs, fmt.Errorf("MaxAssociations: %d is negative", s.MaxAssociations))
	}
	for _, d := range []struct {
		name string
		v    time.Duration
	}{{"ARTIMTimeout", s.ARTIMTimeout}, {"IdleTimeout", s.IdleTimeout}, {"WriteTimeout", s.WriteTimeout}} {
		if d.v < 0 {
			errs = append(errs, fmt.Errorf("%s: %v is negative", d.name, d.v))
		}
	}
	for i, uid := range s.StorageSOPClasses {
		if !isStorageSOPClass(uid) {
			errs = append(errs, fmt.Errorf("StorageSOPClasses[%d]: %q is not a storage SOP class", i, uid))
		}
	}
	return errors.Join(errs...)
}

// ValidateAETitle checks an AE title against PS3.5 6.2 (AE VR): 1 to 16
// significant characters of the default repertoire, no backslash or
// control characters. It is pdu.CheckAETitle, exported here for
// configuration checks.
func ValidateAETitle(ae string) error { return pdu.CheckAETitle(ae) }

func (s *Server) aeTitle() string {
	if s.AETitle == "" {
		return DefaultAETitle
	}
	return s.AETitle
}

func (s *Server) callingAllowed(ae string) bool {
	return len(s.AllowedCallingAETitles) == 0 || slices.ContainsFunc(s.AllowedCallingAETitles, func(a string) bool {
		return strings.TrimSpace(a) == ae
	})
}

func (s *Server) acceptsAbstract(abstract string) bool {
	if abstract == VerificationSOPClass {
		return true
	}
	if s.Handler == nil {
		return false
	}
	if s.AcceptAllStorage {
		return isStorageSOPClass(abstract)
	}
	classes := s.StorageSOPClasses
	if classes == nil {
		classes = defaultStorageSOPClasses
	}
	return slices.Contains(classes, abstract)
}

// ListenAndServe listens on the TCP address addr and calls Serve.
func (s *Server) ListenAndServe(addr string) error {
	if s.inShutdown.Load() {
		return ErrServerClosed
	}
	l, err := net.Listen("tcp", addr)
	if err != nil {
		return err
	}
	return s.Serve(l)
}

// Serve accepts connections on l, serving each in its own goroutine. It
// always returns a non-nil error; after Shutdown or Close it returns
// ErrServerClosed.
func (s *Server) Serve(l net.Listener) error {
	if err := s.Validate(); err != nil {
		l.Close()
		return fmt.Errorf("scp: invalid configuration: %w", err)
	}
	if !s.trackListener(&l, true) {
		l.Close()
		return ErrServerClosed
	}
	defer s.trackListener(&l, false)

	var backoff time.Duration
	for {
		nc, err := l.Accept()
		if err != nil {
			if s.inShutdown.Load() {
				return ErrServerClosed
			}
			if errors.Is(err, net.ErrClosed) {
				return err
			}
			// Anything else (too many open files, a reset before
			// accept) passes; back off like net/http does.
			backoff = min(max(2*backoff, 5*time.Millisecond), time.Second)
			s.logger().Warn("accept failed; retrying", "err", err, "delay", backoff)
			time.Sleep(backoff)
			continue
		}
		backoff = 0
		c := &conn{srv: s, nc: nc, state: stateAwaitingRQ}
		if !s.trackConn(c, true) {
			nc.Close()
			continue
		}
		go c.serve()
	}
}

func (s *Server) trackListener(l *net.Listener, add bool) bool {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.listeners == nil {
		s.listeners = make(map[*net.Listener]struct{})
	}
	if add {
		if s.inShutdown.Load() {
			return false
		}
		s.listeners[l] = struct{}{}
	} else {
		delete(s.listeners, l)
	}
	return true
}

func (s *Server) trackConn(c *conn, add bool) bool {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.conns == nil {
		s.conns = make(map[*conn]struct{})
	}
	if add {
		if s.inShutdown.Load() {
			return false
		}
		s.conns[c] = struct{}{}
	} else {
		delete(s.conns, c)
	}
	return true
}

// reserveAssociation counts an association against MaxAssociations.
func (s *Server) reserveAssociation() bool {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.assocs >= s.maxAssocs() {
		return false
	}
	s.assocs++
	return true
}

func (s *Server) releaseAssociation() {
	s.mu.Lock()
	s.assocs--
	s.mu.Unlock()
}

func (s *Server) closeListeners() error {
	var errs []error
	for l := range s.listeners {
		if err := (*l).Close(); err != nil && !errors.Is(err, net.ErrClosed) {
			errs = append(errs, err)
		}
	}
	return errors.Join(errs...)
}

// Shutdown stops the server gracefully: it closes the listeners so no new
// association starts, aborts associations that are idle between
// messages, and waits for every C-STORE in flight to finish and be
// answered before aborting its association. If ctx ends first, the
// remaining connections are closed and ctx's error is returned.
func (s *Server) Shutdown(ctx context.Context) error {
	s.inShutdown.Store(true)
	s.mu.Lock()
	lerr := s.closeListeners()
	s.mu.Unlock()

	ticker := time.NewTicker(shutdownPollInterval)
	defer ticker.Stop()
	for {
		s.mu.Lock()
		for c := range s.conns {
			c.interruptIfIdle()
		}
		n := len(s.conns)
		s.mu.Unlock()
		if n == 0 {
			return lerr
		}
		select {
		case <-ctx.Done():
			s.Close()
			return ctx.Err()
		case <-ticker.C:
		}
	}
}

// Close closes the listeners and every connection at once, without
// A-ABORT. For a graceful stop use Shutdown.
func (s *Server) Close() error {
	s.inShutdown.Store(true)
	s.mu.Lock()
	defer s.mu.Unlock()
	err := s.closeListeners()
	for c := range s.conns {
		c.nc.Close()
	}
	return err
}

// ActiveAssociations returns the number of associations established now.
func (s *Server) ActiveAssociations() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.assocs
}

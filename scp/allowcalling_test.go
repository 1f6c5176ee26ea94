package scp_test

import (
	"context"
	"errors"
	"net"
	"testing"

	"dwiaudit/scp"
	"dwiaudit/scp/pdu"
)

func TestAllowCallingRefusesAPeerFromTheWrongNetwork(t *testing.T) {
	for _, tc := range []struct {
		name   string
		allow  bool
		wantRJ bool
	}{
		{"a peer the hook accepts gets an association", true, false},
		{"a peer the hook refuses is rejected as an unknown calling AE title", false, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			l, err := net.Listen("tcp", "127.0.0.1:0")
			if err != nil {
				t.Fatal(err)
			}
			asked := make(chan string, 1)
			srv := &scp.Server{AETitle: "DWIAUDIT", AllowCalling: func(ae string, remote net.Addr) bool {
				asked <- ae + "@" + remote.(*net.TCPAddr).IP.String()
				return tc.allow
			}}
			go srv.Serve(l)
			t.Cleanup(func() { srv.Close() })
			d := &scp.Dialer{CallingAETitle: "QOH_MR1", CalledAETitle: "DWIAUDIT"}
			a, err := d.Dial(context.Background(), l.Addr().String(), []scp.Context{{AbstractSyntax: scp.VerificationSOPClass, TransferSyntaxes: []string{scp.ImplicitVRLittleEndian}}})
			var rj *scp.RejectError
			switch {
			case tc.wantRJ && !errors.As(err, &rj):
				t.Fatalf("Dial: got %v, want a rejection", err)
			case tc.wantRJ:
				// PS3.8 9.3.4 Table 9-21: result 1 permanent, source 1
				// service user, reason 3 calling AE title not recognized.
				if rj.RJ.Result != pdu.RejectPermanent || rj.RJ.Source != pdu.SourceServiceUser || rj.RJ.Reason != pdu.ReasonCallingAENotRecognized {
					t.Errorf("reject = %+v, want 1/1/3", rj.RJ)
				}
			case err != nil:
				t.Fatalf("Dial: %v", err)
			default:
				if err := a.Echo(context.Background()); err != nil {
					t.Errorf("Echo: %v", err)
				}
				a.Release(context.Background())
			}
			if got := <-asked; got != "QOH_MR1@127.0.0.1" {
				t.Errorf("hook asked about %q, want QOH_MR1@127.0.0.1", got)
			}
		})
	}
}

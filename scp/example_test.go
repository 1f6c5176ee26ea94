package scp_test

import (
	"context"
	"fmt"
	"io"
	"net"
	"strings"

	"dwiaudit/scp"
)

// An acceptor on loopback takes a C-ECHO and a C-STORE from our requestor.
// The handler sees the data set as a stream, exactly as sent; its answer
// goes back as the C-STORE-RSP status only once it returns.
func Example() {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		fmt.Println(err)
		return
	}
	summaries := make(chan scp.AssociationSummary, 1)
	srv := &scp.Server{
		AETitle: "DWIAUDIT",
		Handler: scp.StoreHandlerFunc(func(ctx context.Context, req *scp.StoreRequest) error {
			n, err := io.Copy(io.Discard, req.Data)
			fmt.Printf("received %s from %s: %d bytes\n", req.SOPInstanceUID, req.CallingAETitle, n)
			return err // nil: Success (0000H)
		}),
		OnAssociation: func(s scp.AssociationSummary) { summaries <- s },
	}
	go srv.Serve(l)
	defer srv.Close()

	ctx := context.Background()
	d := &scp.Dialer{CallingAETitle: "QOH_MR1", CalledAETitle: "DWIAUDIT"}
	a, err := d.Dial(ctx, l.Addr().String(), []scp.Context{
		{AbstractSyntax: scp.VerificationSOPClass, TransferSyntaxes: []string{scp.ImplicitVRLittleEndian}},
		{AbstractSyntax: scp.MRImageStorage, TransferSyntaxes: []string{scp.ExplicitVRLittleEndian}},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	if err := a.Echo(ctx); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("echo: success")

	// A stand-in for a data set: the acceptor streams it to the handler
	// without parsing it.
	data := strings.NewReader(strings.Repeat("\x00", 1000))
	rsp, err := a.Store(ctx, scp.MRImageStorage, "2.25.4242.1.1", scp.ExplicitVRLittleEndian, data)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("store:", rsp.Status)
	if err := a.Release(ctx); err != nil {
		fmt.Println(err)
		return
	}

	s := <-summaries
	fmt.Printf("association %s: %d echo, %d instance, %d bytes\n", s.Result, s.Echoes, s.Instances, s.Bytes)
	// Output:
	// echo: success
	// received 2.25.4242.1.1 from QOH_MR1: 1000 bytes
	// store: 0x0000 (success)
	// association released: 1 echo, 1 instance, 1000 bytes
}

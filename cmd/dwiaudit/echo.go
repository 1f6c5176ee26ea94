package main

import (
	"context"
	"fmt"
	"time"

	"dwiaudit/scp"
)

func runEcho(ctx context.Context, env *cliEnv, args []string) int {
	fs := newFlagSet(env, "echo", "[flags] HOST:PORT")
	calling := fs.String("calling-ae", scp.DefaultCallingAETitle, "our (calling) AE title")
	called := fs.String("called-ae", scp.DefaultCalledAETitle, "the peer's (called) AE title; the default is a dwiaudit node's own")
	timeout := fs.Duration("timeout", 30*time.Second, "give up after this long")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 1 {
		fmt.Fprintln(env.stderr, "dwiaudit echo: want exactly one HOST:PORT")
		fs.Usage()
		return exitUsage
	}
	addr := fs.Arg(0)
	ctx, cancel := context.WithTimeout(ctx, *timeout)
	defer cancel()
	start := time.Now()
	d := &scp.Dialer{CallingAETitle: *calling, CalledAETitle: *called}
	a, err := d.Dial(ctx, addr, []scp.Context{{AbstractSyntax: scp.VerificationSOPClass, TransferSyntaxes: []string{scp.ImplicitVRLittleEndian}}})
	if err != nil {
		fmt.Fprintln(env.stderr, err)
		return exitFailure
	}
	if err := a.Echo(ctx); err != nil {
		a.Abort()
		fmt.Fprintln(env.stderr, "C-ECHO failed:", err)
		return exitFailure
	}
	if err := a.Release(ctx); err != nil {
		fmt.Fprintln(env.stderr, "release failed:", err)
		return exitFailure
	}
	fmt.Fprintf(env.stdout, "C-ECHO to %s (%s) succeeded in %v\n", addr, *called, time.Since(start).Round(time.Millisecond))
	return exitOK
}

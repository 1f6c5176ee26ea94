package seglog_test

import (
	"fmt"
	"io"
	"log"
	"os"

	"dwiaudit/store/seglog"
)

// A record is appended, durable once Append returns, read back as a
// section of its segment, and found again by replay after a reopen, from
// a mark the caller kept (an index stores the Next of the last record it
// applied).
func Example() {
	dir, err := os.MkdirTemp("", "seglog-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)

	l, err := seglog.Open(dir, seglog.Options{})
	if err != nil {
		log.Fatal(err)
	}
	const uid = "1.2.826.0.1.3680043.10.3.1"
	payload := []byte("first instance")
	first, err := l.Append(uid, payload)
	if err != nil {
		log.Fatal(err)
	}
	if _, err := l.Append("1.2.826.0.1.3680043.10.3.2", []byte("second instance")); err != nil {
		log.Fatal(err)
	}
	r, err := l.Read(first)
	if err != nil {
		log.Fatal(err)
	}
	b, _ := io.ReadAll(r)
	fmt.Printf("read %s: %q\n", r.UID, b)
	l.Close()

	// Reopen, replaying only what follows the first record.
	mark := first.After(uid, int64(len(payload)))
	l, err = seglog.Open(dir, seglog.Options{From: mark, Replay: func(e seglog.Entry) error {
		fmt.Printf("replayed %s, %d bytes\n", e.UID, e.Size)
		return nil
	}})
	if err != nil {
		log.Fatal(err)
	}
	l.Close()
	// Output:
	// read 1.2.826.0.1.3680043.10.3.1: "first instance"
	// replayed 1.2.826.0.1.3680043.10.3.2, 15 bytes
}

package store

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"sort"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
)

// openWithin opens opts, failing the test if Open hangs (it must not: a
// held lock gives ErrLocked after lockTimeout).
func openWithin(t *testing.T, opts Options) (*Store, error) {
	t.Helper()
	type res struct {
		s   *Store
		err error
	}
	ch := make(chan res, 1)
	go func() { s, err := Open(opts); ch <- res{s, err} }()
	select {
	case r := <-ch:
		if r.s != nil {
			t.Cleanup(func() { r.s.Close() })
		}
		return r.s, r.err
	case <-time.After(10 * time.Second):
		t.Fatal("Open hung on a held lock")
		return nil, nil
	}
}

func TestReadOnly(t *testing.T) {
	s, opts := newTestStore(t)
	ti := testInstance{SOP: uid(40, 1), Payload: 2048}
	mustPut(t, s, ti)
	ro := opts
	ro.ReadOnly = true
	ro.Describe = nil

	t.Run("a read-only open while a writer holds the index fails with ErrLocked", func(t *testing.T) {
		if _, err := openWithin(t, ro); !errors.Is(err, ErrLocked) {
			t.Errorf("Open = %v, want ErrLocked", err)
		}
	})
	t.Run("a second writer fails with ErrLocked too", func(t *testing.T) {
		if _, err := openWithin(t, opts); !errors.Is(err, ErrLocked) {
			t.Errorf("Open = %v, want ErrLocked", err)
		}
	})

	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	before := folderFiles(t, opts.Dir)
	r, err := openWithin(t, ro)
	if err != nil {
		t.Fatalf("read-only Open with nobody holding the index: %v", err)
	}

	t.Run("a read-only store sees the data", func(t *testing.T) {
		studies, err := r.Studies("")
		if err != nil || len(studies) != 1 || len(studies[0].Series) != 1 || studies[0].Series[0].Instances != 1 {
			t.Fatalf("Studies = %+v, %v", studies, err)
		}
		rc, err := r.OpenInstance(ti.SOP)
		if err != nil {
			t.Fatal(err)
		}
		defer rc.Close()
		b, _ := io.ReadAll(rc)
		if in, _ := r.Instance(ti.SOP); string(b[in.DataSetOffset:]) != string(ti.dataSet()) {
			t.Error("data set read back differs")
		}
		if err := r.Ping(); err != nil {
			t.Errorf("Ping = %v", err)
		}
	})
	t.Run("two read-only stores may be open at once", func(t *testing.T) {
		if _, err := openWithin(t, ro); err != nil {
			t.Errorf("second read-only Open = %v", err)
		}
	})
	t.Run("writes are refused with ErrReadOnly", func(t *testing.T) {
		if _, err := r.Put(t.Context(), ti.request(), nil); !errors.Is(err, ErrReadOnly) {
			t.Errorf("Put = %v", err)
		}
		if _, err := r.Prune(t.Context()); !errors.Is(err, ErrReadOnly) {
			t.Errorf("Prune = %v", err)
		}
		if _, err := r.Reconcile(t.Context()); !errors.Is(err, ErrReadOnly) {
			t.Errorf("Reconcile = %v", err)
		}
	})
	t.Run("a read-only open changes nothing in the folder", func(t *testing.T) {
		os.WriteFile(filepath.Join(opts.Dir, tmpDir, "put-5-5.tmp"), nil, 0o600) // a crashed writer's leftover
		before := append(before, "tmp/put-5-5.tmp")
		if _, err := openWithin(t, ro); err != nil {
			t.Fatal(err)
		}
		sort.Strings(before)
		sameFiles(t, before, folderFiles(t, opts.Dir))
	})
	t.Run("a read-only open of an empty folder fails with ErrNoIndex and creates nothing", func(t *testing.T) {
		empty := filepath.Join(t.TempDir(), "none")
		ro := ro
		ro.Dir = empty
		if _, err := openWithin(t, ro); !errors.Is(err, ErrNoIndex) {
			t.Errorf("Open = %v, want ErrNoIndex", err)
		}
		if _, err := os.Stat(empty); !errors.Is(err, os.ErrNotExist) {
			t.Errorf("folder created: %v", err)
		}
	})
}

func TestOpenRefuses(t *testing.T) {
	t.Run("a writable store without Describe", func(t *testing.T) {
		if _, err := Open(Options{Dir: t.TempDir()}); !errors.Is(err, errNoDescribe) {
			t.Errorf("Open = %v, want ErrNoDescribe", err)
		}
	})
	t.Run("an index with a newer schema", func(t *testing.T) {
		s, opts := newTestStore(t)
		err := s.db.Update(func(tx *bolt.Tx) error { return tx.Bucket(bucketMeta).Put(keySchema, []byte("99")) })
		if err != nil {
			t.Fatal(err)
		}
		s.Close()
		if _, err := Open(opts); !errors.Is(err, errSchema) {
			t.Errorf("Open = %v, want ErrSchema", err)
		}
		opts.ReadOnly = true
		if _, err := Open(opts); !errors.Is(err, errSchema) {
			t.Errorf("read-only Open = %v, want ErrSchema", err)
		}
	})
}

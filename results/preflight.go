package results

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
)

// preflight checks a file's bbolt meta pages against its size before the file is mapped.
// bbolt maps the whole file into memory and trusts its meta page: a store cut short
// (a copy interrupted, a full disk) would otherwise crash the process with a memory fault
// on first read instead of giving an error.
//
// bbolt meta page layout (go.etcd.io/bbolt, page.go and meta.go): a 16-byte page header,
// then magic u32, version u32, page size u32, flags u32, root bucket (16 bytes), freelist
// page id u64, high-water page id u64, txid u64, checksum u64 (all little endian here).
func preflight(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return err
	}
	if st.IsDir() {
		return fmt.Errorf("%s is a folder, not a store file", path)
	}
	head := make([]byte, 80)
	if _, err := io.ReadFull(f, head); errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return fmt.Errorf("%s is not a readable bbmx store: too short (%d bytes)", path, st.Size())
	} else if err != nil {
		return fmt.Errorf("%s is not a readable bbmx store: %w", path, err)
	}
	readMeta := func(b []byte) (pageSize, hwm, txid uint64, ok bool) {
		if binary.LittleEndian.Uint32(b[16:]) != boltMagic {
			return 0, 0, 0, false
		}
		return uint64(binary.LittleEndian.Uint32(b[24:])), binary.LittleEndian.Uint64(b[56:]), binary.LittleEndian.Uint64(b[64:]), true
	}
	ps, hwm, tx0, ok0 := readMeta(head)
	if !ok0 || ps < 512 || ps > 1<<20 {
		return fmt.Errorf("%s is not a readable bbmx store: no database header", path)
	}
	second := make([]byte, 80)
	if _, err := f.ReadAt(second, int64(ps)); err == nil {
		if ps1, hwm1, tx1, ok1 := readMeta(second); ok1 && ps1 == ps && tx1 > tx0 {
			hwm = hwm1
		}
	}
	if need := hwm * ps; uint64(st.Size()) < need {
		return fmt.Errorf("%s is truncated: %d bytes, its header says at least %d", path, st.Size(), need)
	}
	return nil
}

// boltMagic is the number at byte 16 of every bbolt meta page.
const boltMagic = 0xED0CDAED

// hasDatabaseHeader reports whether the file at path begins with a bbolt meta page.
func hasDatabaseHeader(path string) bool {
	f, err := os.Open(path)
	if err != nil {
		return false
	}
	defer f.Close()
	head := make([]byte, 20)
	if _, err := io.ReadFull(f, head); err != nil {
		return false
	}
	return binary.LittleEndian.Uint32(head[16:]) == boltMagic
}

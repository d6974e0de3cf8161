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
	m, ok := readMetaPage(head)
	ps := m.pageSize
	if !ok || ps < 512 || ps > 1<<20 {
		return fmt.Errorf("%s is not a readable bbmx store: no database header", path)
	}
	second := make([]byte, 80)
	if _, err := f.ReadAt(second, int64(ps)); err == nil {
		if m1, ok1 := readMetaPage(second); ok1 && m1.pageSize == ps && m1.txid > m.txid {
			m = m1
		}
	}
	if need := m.hwm * ps; uint64(st.Size()) < need {
		return fmt.Errorf("%s is truncated: %d bytes, its header says at least %d", path, st.Size(), need)
	}
	return checkFreelist(f, path, ps, m.freelist, m.hwm)
}

// metaPage is what this package reads of a bbolt meta page: the page size, the root
// bucket's 16-byte header, the free-page list's page, the high-water page and the txid.
type metaPage struct {
	pageSize, freelist, hwm, txid uint64
	root                          []byte
}

// readMetaPage reads the first 80 bytes b of a meta page (layout above), and whether
// they hold bbolt's magic number.
func readMetaPage(b []byte) (metaPage, bool) {
	if binary.LittleEndian.Uint32(b[16:]) != boltMagic {
		return metaPage{}, false
	}
	return metaPage{
		pageSize: uint64(binary.LittleEndian.Uint32(b[24:])),
		root:     b[32:48],
		freelist: binary.LittleEndian.Uint64(b[48:]),
		hwm:      binary.LittleEndian.Uint64(b[56:]),
		txid:     binary.LittleEndian.Uint64(b[64:]),
	}, true
}

// checkFreelist checks the header of the free-page list's page, which bbolt reads while
// opening a store for writing and trusts: damage there panics inside bbolt's Open, where
// the file stays locked (its mapping holds the lock) until the process exits.
func checkFreelist(f *os.File, path string, ps, freelist, hwm uint64) error {
	if _, _, err := freelistHeader(f, ps, freelist, hwm); err != nil {
		return fmt.Errorf("%s is damaged (its free-page list %v): restore it from a copy", path, err)
	}
	return nil
}

// noFreelist is the free-page list's page in the meta page of a store that keeps none.
const noFreelist = ^uint64(0)

// freelistHeader reads and checks the header of the free-page list's page list in a file
// of hwm pages of ps bytes, and returns the number of page ids on the list and the
// offset of the first in the page (0, 0 for a store that keeps no list). Page header: id
// u64, flags u16 (0x10 for this page), count u16, overflow u32; a count of 0xFFFF means
// the count is the first u64 after the header; then the page ids, u64 each. The error
// says what is wrong, for a sentence about the list.
func freelistHeader(f *os.File, ps, list, hwm uint64) (count, start uint64, err error) {
	if list == noFreelist {
		return 0, 0, nil
	}
	if list < 2 || list >= hwm {
		return 0, 0, fmt.Errorf("is said to be page %d of %d", list, hwm)
	}
	h := make([]byte, 24)
	if _, err := f.ReadAt(h, int64(list*ps)); err != nil {
		return 0, 0, err
	}
	id, flags := binary.LittleEndian.Uint64(h), binary.LittleEndian.Uint16(h[8:])
	count, overflow := uint64(binary.LittleEndian.Uint16(h[10:])), uint64(binary.LittleEndian.Uint32(h[12:]))
	start = 16
	if count == 0xFFFF {
		count, start = binary.LittleEndian.Uint64(h[16:]), 24
	}
	switch {
	case id != list || flags != 0x10:
		return 0, 0, fmt.Errorf("page %d has the header of page %d, type %#x", list, id, flags)
	case overflow >= hwm-list || count > ((overflow+1)*ps-start)/8:
		return 0, 0, fmt.Errorf("page %d claims %d ids on %d pages", list, count, overflow+1)
	}
	return count, start, nil
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

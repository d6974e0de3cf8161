package results

import (
	"encoding/binary"
	"fmt"
	"os"
)

// walkTree checks the shape of a bbolt file's B+trees before anything follows them:
// from the root bucket of the meta page of transaction txid, every branch page's
// children and every bucket's root must be pages of the file, of the right type, each
// reached once; then that transaction's free-page list must name none of them
// (freePages). bbolt's cursors trust the trees: a branch page that names itself or an
// ancestor sends a cursor down without end, until the process runs out of memory, which
// no guard can catch. It reads the file with ReadAt, so damage anywhere is an error here.
//
// Layout (go.etcd.io/bbolt, internal/common): a page header is id u64, flags u16 (0x01
// branch, 0x02 leaf), count u16, overflow u32; a branch element is pos u32, ksize u32,
// child page u64; a leaf element is flags u32 (0x01: the value is a bucket), pos u32,
// ksize u32, vsize u32, its key and value at pos bytes from the element; a bucket value is
// its root page u64 and a sequence u64, followed by the bucket's own leaf page when the
// root is 0 (an inline bucket). Meta pages are read by readMetaPage.
func walkTree(path string, txid uint64) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	var meta metaPage
	found := false
	ps := uint64(0) // from meta page 0: where meta page 1 starts
	for m := range 2 {
		b := make([]byte, 80)
		if _, err := f.ReadAt(b, int64(ps)); err != nil {
			if m == 0 {
				return err
			}
			continue
		}
		mp, ok := readMetaPage(b)
		if m == 0 {
			ps = uint64(binary.LittleEndian.Uint32(b[24:])) // read even if the magic is damaged
		}
		if ok && mp.txid == txid {
			meta, found = mp, true
		}
	}
	if !found || ps < 512 {
		return fmt.Errorf("no meta page of transaction %d", txid)
	}
	w := treeWalk{f: f, ps: ps, hwm: meta.hwm, seen: make([]uint64, meta.hwm/64+1)}
	if err := w.bucket(meta.root, "root"); err != nil {
		return err
	}
	return w.freePages(meta.freelist)
}

// freePages checks the free-page list of the same transaction against the trees just
// walked: every page it names must lie in the file, be named once, and be used by no
// tree. bbolt trusts the list: a live page on it is handed out again by the next write,
// which overwrites that page's data. The ids are read a chunk at a time, so a damaged
// count costs no memory.
func (w *treeWalk) freePages(list uint64) error {
	count, start, err := freelistHeader(w.f, w.ps, list, w.hwm)
	if err != nil {
		return fmt.Errorf("the free-page list %v", err)
	}
	buf := make([]byte, 8*1024)
	for done := uint64(0); done < count; {
		n := min(count-done, uint64(len(buf)/8))
		b := buf[:8*n]
		if _, err := w.f.ReadAt(b, int64(list*w.ps+start+8*done)); err != nil {
			return err
		}
		for i := range n {
			id := binary.LittleEndian.Uint64(b[8*i:])
			switch {
			case id < 2 || id >= w.hwm:
				return fmt.Errorf("the free-page list names page %d, outside the file's %d", id, w.hwm)
			case w.reached(id):
				return fmt.Errorf("the free-page list names page %d, which is in use or named twice", id)
			}
		}
		done += n
	}
	return nil
}

type treeWalk struct {
	f       *os.File
	ps, hwm uint64
	seen    []uint64 // pages reached so far, one bit each
}

// reached marks page id as reached and says whether it was before.
func (w *treeWalk) reached(id uint64) bool {
	was := w.seen[id/64]&(1<<(id%64)) != 0
	w.seen[id/64] |= 1 << (id % 64)
	return was
}

// span is the bytes of one page as walkTree reads them: a page of the file (at byte base,
// size bytes with its overflow pages), or an inline bucket's page held in memory. Only
// the parts needed are read, so a damaged size costs no memory.
type span struct {
	f    *os.File
	base uint64
	mem  []byte
	size uint64
}

func (s span) read(off, n uint64) ([]byte, error) {
	if off+n > s.size {
		return nil, fmt.Errorf("bytes %d to %d of a page of %d", off, off+n, s.size)
	}
	if s.f == nil {
		return s.mem[off : off+n], nil
	}
	b := make([]byte, n)
	_, err := s.f.ReadAt(b, int64(s.base+off))
	return b, err
}

// bucket checks the tree of the bucket whose 16-byte header starts b (for an inline
// bucket its page follows in b).
func (w *treeWalk) bucket(b []byte, name string) error {
	root := binary.LittleEndian.Uint64(b)
	if root == 0 {
		return w.elements(span{mem: b[16:], size: uint64(len(b) - 16)}, 0, name)
	}
	return w.page(root, name)
}

// page checks page id and the pages below it.
func (w *treeWalk) page(id uint64, name string) error {
	if id < 2 || id >= w.hwm {
		return fmt.Errorf("bucket %s names page %d, outside the file's %d", name, id, w.hwm)
	}
	if w.reached(id) {
		return fmt.Errorf("page %d is reached twice (bucket %s)", id, name)
	}
	h := make([]byte, 16)
	if _, err := w.f.ReadAt(h, int64(id*w.ps)); err != nil {
		return err
	}
	overflow := uint64(binary.LittleEndian.Uint32(h[12:]))
	if binary.LittleEndian.Uint64(h) != id || overflow >= w.hwm-id {
		return fmt.Errorf("page %d has the header of page %d, spanning %d more", id, binary.LittleEndian.Uint64(h), overflow)
	}
	return w.elements(span{f: w.f, base: id * w.ps, size: (overflow + 1) * w.ps}, id, name)
}

// elements checks the elements of page p (page id, or 0 for an inline bucket's page).
func (w *treeWalk) elements(p span, id uint64, name string) error {
	h, err := p.read(0, 16)
	if err != nil {
		return fmt.Errorf("page %d (bucket %s): %v", id, name, err)
	}
	flags, count := binary.LittleEndian.Uint16(h[8:]), uint64(binary.LittleEndian.Uint16(h[10:]))
	es, err := p.read(16, 16*count)
	if err != nil {
		return fmt.Errorf("page %d (bucket %s): %d elements do not fit (%v)", id, name, count, err)
	}
	for i := range count {
		e, at := es[16*i:], 16+16*i
		switch flags {
		case 0x01: // branch: pos, ksize, child page
			pos, ksize := uint64(binary.LittleEndian.Uint32(e)), uint64(binary.LittleEndian.Uint32(e[4:]))
			if at+pos+ksize > p.size {
				return fmt.Errorf("page %d (bucket %s): element %d lies outside the page", id, name, i)
			}
			if err := w.page(binary.LittleEndian.Uint64(e[8:]), name); err != nil {
				return err
			}
		case 0x02: // leaf: flags, pos, ksize, vsize
			pos, ksize := uint64(binary.LittleEndian.Uint32(e[4:])), uint64(binary.LittleEndian.Uint32(e[8:]))
			vsize := uint64(binary.LittleEndian.Uint32(e[12:]))
			if at+pos+ksize+vsize > p.size {
				return fmt.Errorf("page %d (bucket %s): element %d lies outside the page", id, name, i)
			}
			if binary.LittleEndian.Uint32(e)&0x01 == 0 {
				continue
			}
			// A bucket: its 16-byte header, and an inline bucket's page after it, which
			// bbolt keeps only while it is under a quarter of a page.
			if vsize < 16 || vsize > w.ps {
				return fmt.Errorf("page %d (bucket %s): element %d is a bucket of %d bytes", id, name, i, vsize)
			}
			key, err := p.read(at+pos, min(ksize, 64))
			if err != nil {
				return err
			}
			val, err := p.read(at+pos+ksize, vsize)
			if err != nil {
				return err
			}
			if err := w.bucket(val, name+"/"+string(key)); err != nil {
				return err
			}
		default:
			return fmt.Errorf("page %d (bucket %s) is of type %#x", id, name, flags)
		}
	}
	return nil
}

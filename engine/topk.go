package engine

import "sort"

// topK keeps the k largest radii seen, with positions, as a min-heap on (radius, position).
// Ties are broken by the position's coordinates so the kept set is a function of the
// multiset of particles only, never of the order they were offered in.
type topK struct {
	k     int
	items []topItem
}

type topItem struct {
	r   float64
	pos []float64
}

// less orders items by radius, then position lexicographically.
func (a topItem) less(b topItem) bool {
	if a.r != b.r {
		return a.r < b.r
	}
	for i := range a.pos {
		if a.pos[i] != b.pos[i] {
			return a.pos[i] < b.pos[i]
		}
	}
	return false
}

// worthy reports whether radius r could enter the set; it is the cheap test on the hot path.
func (t *topK) worthy(r float64) bool { return len(t.items) < t.k || r >= t.items[0].r }

// offer adds (r, pos) if it belongs among the k largest; pos is copied, never kept, so
// that a caller's pos need not be on the heap (offers are frequent early in a walk).
func (t *topK) offer(r float64, pos []float64) {
	if len(t.items) < t.k {
		t.items = append(t.items, topItem{r: r, pos: append([]float64(nil), pos...)})
		t.up(len(t.items) - 1)
		return
	}
	if !t.items[0].less(topItem{r: r, pos: pos}) {
		return
	}
	copy(t.items[0].pos, pos) // reuse the evicted item's storage
	t.items[0].r = r
	t.down(0)
}

func (t *topK) up(i int) {
	for i > 0 {
		p := (i - 1) / 2
		if !t.items[i].less(t.items[p]) {
			return
		}
		t.items[i], t.items[p] = t.items[p], t.items[i]
		i = p
	}
}

func (t *topK) down(i int) {
	n := len(t.items)
	for {
		l, m := 2*i+1, i
		if l < n && t.items[l].less(t.items[m]) {
			m = l
		}
		if r := l + 1; r < n && t.items[r].less(t.items[m]) {
			m = r
		}
		if m == i {
			return
		}
		t.items[i], t.items[m] = t.items[m], t.items[i]
		i = m
	}
}

// sorted returns the items, largest first.
func (t *topK) sorted() []topItem {
	s := append([]topItem(nil), t.items...)
	sort.Slice(s, func(i, j int) bool { return s[j].less(s[i]) })
	return s
}

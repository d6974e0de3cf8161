package engine

import (
	"crypto/sha256"
	"encoding/binary"
	"fmt"
	"math"
	"sort"
)

// Observe holds the settings of what is recorded per replicate.
type Observe struct {
	TopK        int       // number of largest radii kept with their directions (default 32)
	Window      float64   // the extremal histogram covers R - m_T in [-Window, +Window) plus an overflow bin (default 8)
	BinWidth    float64   // histogram bin width (default 0.05)
	Checkpoints []float64 // times s <= T at which N_s, Z_s, W_s and Z_s(u) are recorded, increasing
	Directions  int       // number of grid directions for Z_s(u) (default 16; always 2 in d = 1)
	Lambda      float64   // the additive martingale's parameter lambda (default theta / 2)
}

// DefaultObserve returns the default settings with no checkpoints.
func DefaultObserve() Observe {
	return Observe{TopK: 32, Window: 8, BinWidth: 0.05, Directions: 16}
}

// Cell is one point of a sweep's grid: a model, a horizon and what to record.
type Cell struct {
	Model   Model
	Horizon float64
	Observe Observe
}

// Limits on what one cell may ask for; they keep records bounded in size.
const (
	MaxTopK        = 4096
	MaxBins        = 1 << 16
	MaxCheckpoints = 256
	MaxDirections  = 4096
)

// Validate reports the first setting that is out of range.
func (c Cell) Validate() error {
	if err := c.Model.Validate(); err != nil {
		return err
	}
	o := c.Observe
	switch {
	case !(c.Horizon > 0) || math.IsInf(c.Horizon, 0):
		return fmt.Errorf("horizon must be a positive finite time, got %v", c.Horizon)
	case o.TopK < 1 || o.TopK > MaxTopK:
		return fmt.Errorf("top-K must be between 1 and %d, got %d", MaxTopK, o.TopK)
	case !(o.Window > 0) || math.IsInf(o.Window, 0):
		return fmt.Errorf("histogram window must be positive, got %v", o.Window)
	case !(o.BinWidth > 0) || math.IsInf(o.BinWidth, 0):
		return fmt.Errorf("histogram bin width must be a positive finite number, got %v", o.BinWidth)
	case o.Window/o.BinWidth > MaxBins/2: // 2 w / b, without overflow for huge w
		return fmt.Errorf("histogram of window %v and bin %v has more than %d bins", o.Window, o.BinWidth, MaxBins)
	case len(o.Checkpoints) > MaxCheckpoints:
		return fmt.Errorf("at most %d checkpoints, got %d", MaxCheckpoints, len(o.Checkpoints))
	case c.Model.Dim > 1 && (o.Directions < 1 || o.Directions > MaxDirections):
		return fmt.Errorf("direction grid size must be between 1 and %d, got %d", MaxDirections, o.Directions)
	case o.Lambda < 0 || math.IsNaN(o.Lambda) || math.IsInf(o.Lambda, 0):
		return fmt.Errorf("lambda must be a non-negative finite number, got %v", o.Lambda)
	}
	for i, s := range o.Checkpoints {
		if !(s > 0) || s > c.Horizon {
			return fmt.Errorf("checkpoint %v is outside (0, horizon %v]", s, c.Horizon)
		}
		if i > 0 && s <= o.Checkpoints[i-1] {
			return fmt.Errorf("checkpoints must increase: %v after %v", s, o.Checkpoints[i-1])
		}
	}
	return nil
}

// WithDefaults fills zero settings with their defaults and sorts the checkpoints.
func (c Cell) WithDefaults() Cell {
	d := DefaultObserve()
	o := c.Observe
	if o.TopK == 0 {
		o.TopK = d.TopK
	}
	if o.Window == 0 {
		o.Window = d.Window
	}
	if o.BinWidth == 0 {
		o.BinWidth = d.BinWidth
	}
	if o.Directions == 0 {
		o.Directions = d.Directions
	}
	if c.Model.Dim == 1 {
		o.Directions = 2
	}
	if o.Lambda == 0 && c.Model.Children >= 2 && c.Model.Sigma > 0 && c.Model.Beta > 0 {
		o.Lambda = c.Model.Theta() / 2
	}
	o.Checkpoints = append([]float64(nil), o.Checkpoints...)
	sort.Float64s(o.Checkpoints)
	c.Observe = o
	return c
}

// Bins is the number of histogram bins: 2 Window / BinWidth (rounded up) plus one overflow bin.
func (c Cell) Bins() int { return int(math.Ceil(2*c.Observe.Window/c.Observe.BinWidth-1e-9)) + 1 }

// NumDirections is the number of grid directions Z_s(u) is recorded on.
func (c Cell) NumDirections() int {
	if c.Model.Dim == 1 {
		return 2
	}
	return c.Observe.Directions
}

// Key is the cell's part of every random-number key: a hash of the model and horizon.
// Observation settings are not part of it, so a replicate's tree does not depend on them
// except through the extra normals drawn at checkpoints.
func (c Cell) Key() uint64 {
	var b []byte
	b = binary.LittleEndian.AppendUint64(b, uint64(c.Model.Dim))
	b = binary.LittleEndian.AppendUint64(b, math.Float64bits(c.Model.Sigma))
	b = binary.LittleEndian.AppendUint64(b, math.Float64bits(c.Model.Beta))
	b = binary.LittleEndian.AppendUint64(b, uint64(c.Model.Children))
	b = binary.LittleEndian.AppendUint64(b, math.Float64bits(c.Horizon))
	h := sha256.Sum256(b)
	return binary.LittleEndian.Uint64(h[:8])
}

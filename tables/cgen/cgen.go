// Package cgen generates C99 code for firmware from a solved pickwise
// model: a header and a source file holding the optimal rule as constant
// tables of 16-bit cumulative probabilities and a chooser function that
// uses no floating point, no allocation, no recursion and no mutable state.
//
// The tables are the optimal tables rounded to multiples of 2^-16
// (Quantize). Rounding changes the worst-case regret, so Generate
// certifies the rounded table again, in exact arithmetic, and states that
// figure in the header.
//
// # Generated layout
//
// The source holds, all static const:
//
//   - PFX_T, the largest reading gap that joins two channels into a group,
//     and lo[] and hi[], the noise range of each channel in steps: the
//     chooser computes the top group and its alive channels (channels not
//     certainly below another) from them exactly as tables.Optimal does;
//     half[], the offsets of readings without a cell (tables.Optimal.Half).
//   - groups[], one descriptor per group of channels with at least one
//     cell, sorted by channel mask (found by binary search). A descriptor
//     holds the box of the group's cells: for member k >= 1, the reading
//     difference r_k - r_first ranges over dmin[k] .. dmin[k]+dlen[k]-1.
//     The differences, offset by dmin and read as mixed-radix digits
//     (member 1 least significant), give the cell's key in 0 .. volume-1.
//   - A group's cells are found through a dense index (dense[base+key], one
//     int32 entry per point of the box) when the box is small: at most four
//     points per cell, so the dense index takes at most twice the memory of
//     the sorted one. Otherwise they are found by binary search in a sorted
//     key array (keys[base .. base+count-1], 32-bit keys, or 64-bit when a
//     box has 2^32 points or more) with a parallel array refs[]. Options can
//     force either form.
//   - An index or refs entry is -1 for no cell (the chooser then picks as
//     tables.Fallback with the offsets half[]), -2-c for a cell that picks channel c with
//     certainty, or otherwise the offset in cum[] of the cell's row.
//   - cum[] holds one row of m-1 uint16 cumulative numerators per
//     randomized cell of an m-member group; identical rows are stored once.
//     Member i is picked for the smallest i with u < cum[i], the last
//     member when there is none, so member i is picked with probability
//     (cum[i] - cum[i-1]) / 65536 (cum[-1] = 0, cum[m-1] = 65536). A
//     cumulative value of 65536 before the last member (the later members
//     have probability 0) does not fit in 16 bits; it is stored as 0 and
//     recognised as lower than its predecessor, which in a randomized cell
//     is positive.
package cgen

import (
	"bytes"
	"fmt"
	"math"
	"math/big"
	"math/bits"
	"path/filepath"
	"sort"
	"strings"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// Index selects how the generated code finds a group's cells.
type Index int

const (
	// IndexAuto uses a dense index for groups whose box of reading
	// differences has at most four points per cell, a sorted key array
	// for the others.
	IndexAuto Index = iota
	// IndexDense uses a dense index for every group.
	IndexDense
	// IndexSorted uses a sorted key array for every group.
	IndexSorted
)

// maxDense is the largest dense index of one group, in entries.
const maxDense = 1 << 26

// Options control Generate. The zero value is ready to use.
type Options struct {
	// Index chooses the lookup structure of the groups.
	Index Index
	// HeaderName is the file name the source includes; empty means the
	// prefix followed by ".h".
	HeaderName string
}

// Info describes generated code.
type Info struct {
	// Regret is the exact worst-case regret of the fixed-point rule, in
	// steps; RegretUnits is the same in reading units.
	Regret, RegretUnits *big.Rat
	// Worst is a configuration reaching it (values in steps, tables.Far
	// for channels outside its subset).
	Worst []int
	// Groups counts the groups with at least one cell; Dense and Sorted
	// how many of them use each lookup structure.
	Groups, Dense, Sorted int
	// Cells counts all cells; Forced those that pick one channel with
	// certainty after rounding, the others are randomized.
	Cells, Forced int
	// Rows is the number of distinct cumulative rows stored.
	Rows int
	// KeyBits is the width of a sorted key: 32 or 64.
	KeyBits int
	// DataBytes is the size of the constant data, counting a group
	// descriptor as 16 + 8n bytes for n channels (no padding beyond that).
	DataBytes int
}

// Code is a generated header and source pair.
type Code struct {
	Header, Source         []byte
	HeaderName, SourceName string
	// Fixed is the rule the code implements.
	Fixed *Fixed
	Info  Info
}

// WriteFiles writes the header and the source into directory dir, each
// atomically.
func (c *Code) WriteFiles(dir string) error {
	if err := result.WriteAtomic(filepath.Join(dir, c.HeaderName), c.Header); err != nil {
		return err
	}
	return result.WriteAtomic(filepath.Join(dir, c.SourceName), c.Source)
}

// CheckPrefix reports whether prefix can start the C names of generated
// code: a letter followed by letters, digits and underscores (so that no
// generated name is reserved to the implementation), at most 24 characters
// (so that prefix_choose stays within the 31 significant characters C99
// guarantees for external names).
func CheckPrefix(prefix string) error {
	if prefix == "" {
		return fmt.Errorf("cgen: empty prefix")
	}
	if len(prefix) > 24 {
		return fmt.Errorf("cgen: prefix %q is longer than 24 characters", prefix)
	}
	for i := 0; i < len(prefix); i++ {
		c := prefix[i]
		letter := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z'
		if i == 0 && !letter {
			return fmt.Errorf("cgen: prefix %q must start with a letter", prefix)
		}
		if !letter && !(c >= '0' && c <= '9') && c != '_' {
			return fmt.Errorf("cgen: prefix %q is not a C identifier (character %q)", prefix, rune(c))
		}
	}
	return nil
}

// group is one group's part of the generated data.
type group struct {
	mask    tables.Set
	members []int
	dmin    []int64 // per member position, [0] unused
	dlen    []int64
	volume  uint64 // 0 when it overflows 64 bits
	keys    []uint64
	refs    []int32 // per key, parallel to keys
	sorted  bool
	base    int
}

// Generate quantizes the optimal tables of sol to 16-bit fixed point,
// certifies the fixed-point rule's worst-case regret exactly, and returns
// C99 code implementing it with names starting with prefix (functions and
// data) and with the upper-cased prefix (macros).
func Generate(sol *result.Solution, prefix string, opt Options) (*Code, error) {
	if err := CheckPrefix(prefix); err != nil {
		return nil, err
	}
	if sol == nil || sol.Model == nil || sol.Layout == nil || sol.Tables == nil || sol.Tables.Layout == nil {
		return nil, fmt.Errorf("cgen: the solution has no model, layout or tables")
	}
	if sol.Lower == nil || sol.Upper == nil {
		return nil, fmt.Errorf("cgen: the solution has no certified interval")
	}
	l := sol.Layout
	if n := len(sol.Model.Channels); n != l.N() || sol.Tables.Layout.N() != n {
		return nil, fmt.Errorf("cgen: the model has %d channels, the layout %d", n, l.N())
	}
	if !(sol.Model.Step > 0) || math.IsInf(sol.Model.Step, 0) {
		return nil, fmt.Errorf("cgen: step %v is not positive", sol.Model.Step)
	}
	if l.T > math.MaxInt32 {
		return nil, fmt.Errorf("cgen: group gap %d steps does not fit in 32 bits", l.T)
	}
	for i := range l.Lo {
		if l.Lo[i] < math.MinInt32 || l.Hi[i] > math.MaxInt32 {
			return nil, fmt.Errorf("channel %q: noise range %d..%d steps does not fit in 32 bits", sol.Model.Channels[i].Name, l.Lo[i], l.Hi[i])
		}
	}
	fixed, err := Quantize(sol.Tables)
	if err != nil {
		return nil, err
	}
	worst, err := fixed.WorstCase()
	if err != nil {
		return nil, err
	}
	code := &Code{Fixed: fixed, HeaderName: opt.HeaderName, SourceName: prefix + ".c"}
	if code.HeaderName == "" {
		code.HeaderName = prefix + ".h"
	}
	if strings.ContainsAny(code.HeaderName, "\"\\\n\r") {
		return nil, fmt.Errorf("cgen: header name %q cannot be included", code.HeaderName)
	}
	info := &code.Info
	info.Regret = worst.Regret
	info.RegretUnits = result.Units(worst.Regret, sol.Model.Step)
	info.Worst = worst.Values

	d := &data{n: l.N()}
	if err := d.build(fixed.Table, opt.Index, info); err != nil {
		return nil, err
	}
	up := strings.ToUpper(prefix) + "_"
	rep := strings.NewReplacer("pfx_", prefix+"_", "PFX_", up)

	var h bytes.Buffer
	writeHeaderComment(&h, sol, code.HeaderName, prefix, up, info)
	guard := strings.ToUpper(prefix) + "_H"
	fmt.Fprintf(&h, "#ifndef %s\n#define %s\n\n", guard, guard)
	h.WriteString(rep.Replace(fmt.Sprintf(cHeaderDecl, l.N())))
	fmt.Fprintf(&h, "\n#endif /* %s */\n", guard)

	var s bytes.Buffer
	writeSourceComment(&s, code, prefix, info)
	fmt.Fprintf(&s, "#include \"%s\"\n\n", code.HeaderName)
	d.write(&s, rep, l)
	s.WriteString(rep.Replace(cCode))

	code.Header, code.Source = h.Bytes(), s.Bytes()
	return code, nil
}

// data is the constant data of the generated source.
type data struct {
	n       int
	groups  []*group
	cum     []uint16
	dense   []int32
	keys    []uint64
	refs    []int32
	keyBits int
	half    []int64 // offsets of missing cells, in half steps
}

// build fills d from the fixed-point table o.
func (d *data) build(o *tables.Optimal, mode Index, info *Info) error {
	d.half = make([]int64, d.n)
	for i := range d.half {
		if o.Half != nil {
			d.half[i] = int64(o.Half[i])
		}
	}
	rows := make(map[string]int32)
	var keyRow []byte
	for _, t := range o.Tables {
		if len(t.Cells) == 0 {
			continue
		}
		m := len(t.Members)
		g := &group{mask: t.Group, members: t.Members, dmin: make([]int64, m), dlen: make([]int64, m)}
		for k := 1; k < m; k++ {
			lo, hi := int64(t.Cells[0].Diff[k]), int64(t.Cells[0].Diff[k])
			for _, c := range t.Cells {
				lo, hi = min(lo, int64(c.Diff[k])), max(hi, int64(c.Diff[k]))
			}
			if lo < math.MinInt32 || hi-lo+1 > math.MaxInt32 {
				return fmt.Errorf("cgen: group %v: reading differences %d..%d do not fit in 32 bits", t.Members, lo, hi)
			}
			g.dmin[k], g.dlen[k] = lo, hi-lo+1
		}
		g.dlen[0] = 1
		g.volume = 1
		for k := 1; k < m; k++ {
			hi, lo := bits.Mul64(g.volume, uint64(g.dlen[k]))
			if hi != 0 {
				g.volume = 0
				break
			}
			g.volume = lo
		}
		// Cells in key order, each with its reference.
		type kc struct {
			key uint64
			ref int32
		}
		cells := make([]kc, 0, len(t.Cells))
		for _, c := range t.Cells {
			var key uint64
			for k := m - 1; k >= 1; k-- {
				key = key*uint64(g.dlen[k]) + uint64(int64(c.Diff[k])-g.dmin[k])
			}
			q := Numerators(c)
			ref := int32(-1)
			for i, x := range q {
				if x == One {
					ref = int32(-2 - t.Members[i])
				}
			}
			if ref == -1 {
				row := make([]uint16, m-1)
				var cum uint32
				for i := 0; i < m-1; i++ {
					cum += q[i]
					row[i] = uint16(cum) // 65536 wraps to 0 (see the package doc)
				}
				keyRow = keyRow[:0]
				for _, x := range row {
					keyRow = append(keyRow, byte(x>>8), byte(x))
				}
				keyRow = append(keyRow, byte(m))
				off, ok := rows[string(keyRow)]
				if !ok {
					if len(d.cum)+len(row) > math.MaxInt32 {
						return fmt.Errorf("cgen: too many cumulative rows")
					}
					off = int32(len(d.cum))
					rows[string(keyRow)] = off
					d.cum = append(d.cum, row...)
				}
				ref = off
			} else {
				info.Forced++
			}
			cells = append(cells, kc{key, ref})
		}
		sort.Slice(cells, func(i, j int) bool { return cells[i].key < cells[j].key })
		for i := 1; i < len(cells); i++ {
			if cells[i].key == cells[i-1].key {
				return fmt.Errorf("cgen: group %v has two cells with the same reading differences", t.Members)
			}
		}
		for _, c := range cells {
			g.keys = append(g.keys, c.key)
			g.refs = append(g.refs, c.ref)
		}
		info.Cells += len(cells)
		switch mode {
		case IndexAuto:
			g.sorted = g.volume == 0 || g.volume > 4*uint64(len(cells)) || g.volume > maxDense
		case IndexDense:
			if g.volume == 0 || g.volume > maxDense {
				return fmt.Errorf("cgen: group %v: a dense index of its box would take more than %d entries", t.Members, maxDense)
			}
		case IndexSorted:
			g.sorted = true
		default:
			return fmt.Errorf("cgen: unknown index mode %d", mode)
		}
		if g.sorted && g.volume == 0 {
			return fmt.Errorf("cgen: group %v: the box of its reading differences has 2^64 points or more", t.Members)
		}
		d.groups = append(d.groups, g)
	}
	sort.Slice(d.groups, func(i, j int) bool { return d.groups[i].mask < d.groups[j].mask })
	d.keyBits = 32
	for _, g := range d.groups {
		if g.sorted {
			g.base = len(d.keys)
			d.keys = append(d.keys, g.keys...)
			d.refs = append(d.refs, g.refs...)
			if g.volume > math.MaxUint32 {
				d.keyBits = 64
			}
			info.Sorted++
		} else {
			g.base = len(d.dense)
			if uint64(len(d.dense))+g.volume > math.MaxInt32 {
				return fmt.Errorf("cgen: the dense indexes exceed 2^31 entries")
			}
			start := len(d.dense)
			for i := uint64(0); i < g.volume; i++ {
				d.dense = append(d.dense, -1)
			}
			for i, k := range g.keys {
				d.dense[start+int(k)] = g.refs[i]
			}
			info.Dense++
		}
	}
	if len(d.keys) > math.MaxInt32 {
		return fmt.Errorf("cgen: more than 2^31 sorted keys")
	}
	info.Groups = len(d.groups)
	info.Rows = len(rows)
	info.KeyBits = d.keyBits
	info.DataBytes = 8*d.n + 2*len(d.cum) + 4*len(d.dense) + (d.keyBits/8+4)*len(d.keys) + (16+8*d.n)*len(d.groups)
	return nil
}

// write writes the constant data as C.
func (d *data) write(w *bytes.Buffer, rep *strings.Replacer, l *tables.Layout) {
	p := func(format string, a ...any) { w.WriteString(rep.Replace(fmt.Sprintf(format, a...))) }
	p("/* Largest reading gap, in steps, that joins two channels into a group. */\n")
	p("#define PFX_T %d\n", l.T)
	p("/* Number of groups with cells: the length of pfx_groups. */\n")
	p("#define PFX_NGROUPS %d\n\n", len(d.groups))
	p("typedef uint%d_t pfx_key_t;\n\n", d.keyBits)

	lo, hi := make([]int64, d.n), make([]int64, d.n)
	for i := range lo {
		lo[i], hi[i] = int64(l.Lo[i]), int64(l.Hi[i])
	}
	p("/* Noise range of each channel, in steps: offsets lo[i] .. hi[i]. */\n")
	p("static const int32_t pfx_lo[PFX_N] = {%s};\n", joinInts(lo, ""))
	p("static const int32_t pfx_hi[PFX_N] = {%s};\n\n", joinInts(hi, ""))
	p("/* Offset of each channel for readings without a cell, in half steps:\n * such readings pick the alive channel with the highest 2*r[i] + half[i]. */\n")
	p("static const int32_t pfx_half[PFX_N] = {%s};\n\n", joinInts(d.half, ""))

	cum := make([]int64, len(d.cum))
	for i, x := range d.cum {
		cum[i] = int64(x)
	}
	array(w, rep, "Cumulative numerators over 65536 of the randomized cells, one row of\n * m-1 values per cell of an m-member group", "uint16_t", "pfx_cum", cum, "u")
	array(w, rep, "Dense indexes: a cell reference per point of a group's box", "int32_t", "pfx_dense", int32s(d.dense), "")
	arrayU(w, rep, "Sorted keys of the groups without a dense index", "pfx_key_t", "pfx_keys", d.keys)
	array(w, rep, "Cell references parallel to pfx_keys", "int32_t", "pfx_refs", int32s(d.refs), "")

	p("/* A group of channels with at least one cell. */\n")
	p("struct pfx_group {\n")
	p("    uint32_t mask; /* bit i set: channel i is a member */\n")
	p("    int32_t sorted; /* 0: dense index, 1: sorted keys */\n")
	p("    int32_t base; /* first entry in pfx_dense or pfx_keys */\n")
	p("    int32_t count; /* entries: box points or keys */\n")
	p("    int32_t dmin[PFX_N]; /* lowest r_k - r_first per member k */\n")
	p("    int32_t dlen[PFX_N]; /* number of differences per member k */\n")
	p("};\n\n")
	n := len(d.groups)
	if n == 0 {
		p("/* No group has cells: every choice is forced. */\n")
		p("static const struct pfx_group pfx_groups[1] = {{0, 0, 0, 0, {0}, {0}}};\n")
		return
	}
	p("static const struct pfx_group pfx_groups[PFX_NGROUPS] = {\n")
	for i, g := range d.groups {
		dmin, dlen := make([]int64, d.n), make([]int64, d.n)
		for k := range dlen {
			dlen[k] = 1
		}
		copy(dmin, g.dmin)
		copy(dlen, g.dlen)
		count, kind := len(g.keys), "sorted"
		s := 1
		if !g.sorted {
			count, kind, s = int(g.volume), "dense", 0
		}
		sep := ","
		if i == n-1 {
			sep = ""
		}
		p("    /* channels %s: %d cells, %s */\n", joinInts(toInt64(g.members), ""), len(g.keys), kind)
		p("    {0x%xu, %d, %d, %d, {%s}, {%s}}%s\n", uint32(g.mask), s, g.base, count, joinInts(dmin, ""), joinInts(dlen, ""), sep)
	}
	p("};\n")
}

func int32s(x []int32) []int64 {
	out := make([]int64, len(x))
	for i, v := range x {
		out[i] = int64(v)
	}
	return out
}

func toInt64(x []int) []int64 {
	out := make([]int64, len(x))
	for i, v := range x {
		out[i] = int64(v)
	}
	return out
}

// joinInts formats integers separated by ", ", each followed by suffix.
func joinInts(x []int64, suffix string) string {
	var b strings.Builder
	for i, v := range x {
		if i > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "%d%s", v, suffix)
	}
	return b.String()
}

// array writes a static const array of signed or small values, or a
// one-element placeholder when x is empty (C has no empty arrays).
func array(w *bytes.Buffer, rep *strings.Replacer, doc, typ, name string, x []int64, suffix string) {
	strs := make([]string, len(x))
	for i, v := range x {
		strs[i] = fmt.Sprintf("%d%s", v, suffix)
	}
	writeArray(w, rep, doc, typ, name, strs)
}

// arrayU is array for unsigned 64-bit values.
func arrayU(w *bytes.Buffer, rep *strings.Replacer, doc, typ, name string, x []uint64) {
	strs := make([]string, len(x))
	for i, v := range x {
		strs[i] = fmt.Sprintf("%du", v)
	}
	writeArray(w, rep, doc, typ, name, strs)
}

func writeArray(w *bytes.Buffer, rep *strings.Replacer, doc, typ, name string, strs []string) {
	w.WriteString(rep.Replace(fmt.Sprintf("/* %s. */\n", doc)))
	if len(strs) == 0 {
		w.WriteString(rep.Replace(fmt.Sprintf("static const %s %s[1] = {0}; /* placeholder: no entries */\n\n", typ, name)))
		return
	}
	w.WriteString(rep.Replace(fmt.Sprintf("static const %s %s[%d] = {\n", typ, name, len(strs))))
	const perLine = 12
	for i := 0; i < len(strs); i += perLine {
		end := min(i+perLine, len(strs))
		w.WriteString("    ")
		w.WriteString(strings.Join(strs[i:end], ", "))
		if end < len(strs) {
			w.WriteString(",")
		}
		w.WriteString("\n")
	}
	w.WriteString("};\n\n")
}

package cgen

// The fixed C text of the generated files. In it, "pfx_" stands for the
// prefix followed by an underscore and "PFX_" for the prefix in upper case
// followed by an underscore; the generator substitutes both.

// cHeaderDecl is the declaration part of the header.
const cHeaderDecl = `#include <stdint.h>

/* Number of channels: the length of the readings array. */
#define PFX_N %d

/*
 * pfx_choose returns the channel (0 to PFX_N - 1) that the rule picks.
 * readings[i] is the reading of channel i in integer steps; u is a uniform
 * random number in 0..65535, drawn independently of the readings. With
 * the same inputs it always returns the same channel. It uses no floating
 * point, no allocation and no mutable state, and accepts every int32_t
 * reading.
 */
int pfx_choose(const int32_t readings[PFX_N], uint16_t u);
`

// cCode is the chooser, after the data.
const cCode = `
/*
 * Channel of alive with the highest reading plus its offset (the highest
 * 2*r[i] + half[i]). On a tie of c channels the draw u shares its 65536
 * values among them in index order: 65536 / c values each, and one more to
 * each of the first 65536 % c.
 */
static int pfx_fallback(uint32_t alive, const int32_t r[PFX_N], uint16_t u)
{
    int i;
    uint32_t c = 0, share, rem, cum = 0;
    int64_t top = 0;

    for (i = 0; i < PFX_N; i++) {
        int64_t s = 2 * (int64_t)r[i] + (int64_t)pfx_half[i];
        if (((alive >> i) & 1u) == 0) {
            continue;
        }
        if (c == 0 || s > top) {
            top = s;
            c = 1;
        } else if (s == top) {
            c++;
        }
    }
    share = 65536u / c;
    rem = 65536u % c;
    for (i = 0; i < PFX_N; i++) {
        if (((alive >> i) & 1u) != 0 &&
            2 * (int64_t)r[i] + (int64_t)pfx_half[i] == top) {
            cum += share;
            if (rem > 0) {
                cum++;
                rem--;
            }
            if ((uint32_t)u < cum) {
                return i;
            }
        }
    }
    return -1; /* unreachable: the shares sum to 65536 > u */
}

/* Descriptor of the group with channel mask m, or 0 when it has no cells. */
static const struct pfx_group *pfx_group_of(uint32_t m)
{
    int32_t lo = 0, hi = PFX_NGROUPS;

    while (lo < hi) {
        int32_t mid = lo + (hi - lo) / 2;
        if (pfx_groups[mid].mask < m) {
            lo = mid + 1;
        } else {
            hi = mid;
        }
    }
    if (lo < PFX_NGROUPS && pfx_groups[lo].mask == m) {
        return &pfx_groups[lo];
    }
    return 0;
}

/*
 * Cell reference of the readings in group g with members mem[0..nm-1]: an
 * offset into pfx_cum, -1 for no cell, or -2 - c for a cell that picks
 * channel c with certainty.
 */
static int32_t pfx_ref(const struct pfx_group *g, const int mem[PFX_N], int nm,
                       const int32_t r[PFX_N])
{
    pfx_key_t key = 0;
    int k;

    for (k = nm - 1; k >= 1; k--) {
        int64_t d = (int64_t)r[mem[k]] - (int64_t)r[mem[0]] - (int64_t)g->dmin[k];
        if (d < 0 || d >= (int64_t)g->dlen[k]) {
            return -1;
        }
        key = key * (pfx_key_t)g->dlen[k] + (pfx_key_t)d;
    }
    if (g->sorted == 0) {
        return pfx_dense[g->base + (int32_t)key];
    } else {
        int32_t lo = g->base, hi = g->base + g->count;
        while (lo < hi) {
            int32_t mid = lo + (hi - lo) / 2;
            if (pfx_keys[mid] < key) {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
        if (lo < g->base + g->count && pfx_keys[lo] == key) {
            return pfx_refs[lo];
        }
        return -1;
    }
}

int pfx_choose(const int32_t readings[PFX_N], uint16_t u)
{
    int order[PFX_N];
    int mem[PFX_N];
    uint32_t group, alive, prev;
    int i, j, k, nm, nalive;
    const struct pfx_group *g;
    const uint16_t *cum;
    int32_t ref;

    /* Channels by reading, highest first (stable insertion sort). */
    for (i = 0; i < PFX_N; i++) {
        for (j = i; j > 0 && readings[order[j - 1]] < readings[i]; j--) {
            order[j] = order[j - 1];
        }
        order[j] = i;
    }
    /* Top group: joined to the highest reading by gaps of at most T. */
    group = (uint32_t)1 << order[0];
    for (i = 1; i < PFX_N; i++) {
        if ((int64_t)readings[order[i - 1]] - (int64_t)readings[order[i]] > (int64_t)PFX_T) {
            break;
        }
        group |= (uint32_t)1 << order[i];
    }
    /* Alive: members not certainly below another member. */
    alive = 0;
    nalive = 0;
    for (k = 0; k < PFX_N; k++) {
        if (((group >> k) & 1u) == 0) {
            continue;
        }
        for (j = 0; j < PFX_N; j++) {
            if (j != k && ((group >> j) & 1u) != 0 &&
                (int64_t)readings[k] - (int64_t)readings[j] <
                    (int64_t)pfx_lo[k] - (int64_t)pfx_hi[j]) {
                break;
            }
        }
        if (j == PFX_N) {
            alive |= (uint32_t)1 << k;
            nalive++;
        }
    }
    if (nalive < 2) {
        return pfx_fallback(alive, readings, u);
    }
    g = pfx_group_of(group);
    if (g == 0) {
        return pfx_fallback(alive, readings, u);
    }
    nm = 0;
    for (k = 0; k < PFX_N; k++) {
        if (((group >> k) & 1u) != 0) {
            mem[nm++] = k;
        }
    }
    ref = pfx_ref(g, mem, nm, readings);
    if (ref == -1) {
        return pfx_fallback(alive, readings, u);
    }
    if (ref < -1) {
        return (int)(-2 - ref);
    }
    /*
     * Member i is picked for the smallest i with u < cum[i]. A stored value
     * below its predecessor is 0 standing for 65536: the later members have
     * probability 0.
     */
    cum = &pfx_cum[ref];
    prev = 0;
    for (i = 0; i < nm - 1; i++) {
        uint32_t c = cum[i];
        if (c < prev || (uint32_t)u < c) {
            return mem[i];
        }
        prev = c;
    }
    return mem[nm - 1];
}
`

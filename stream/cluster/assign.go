package cluster

import (
	"encoding/binary"
	"hash/fnv"
)

// Assign returns the owner of each of n partitions among the live
// members, by rendezvous (highest random weight) hashing: partition p
// goes to the member m with the largest weight w(m, p), ties to the
// smaller name.
//
//	owner(p) = argmax_m w(m, p),  w(m, p) = mix64(FNV-1a₆₄(m ‖ 0x00 ‖ p as 4 bytes big-endian))
//
// mix64 is the 64-bit finaliser of SplitMix64 (Steele, Lea & Flood,
// "Fast splittable pseudorandom number generators", OOPSLA 2014), which
// spreads FNV's low-entropy high bits. Every instance computes the same
// map from the same member set, with no messages between them. When a
// member joins, only the partitions it now wins move, to it; when one
// leaves, only its partitions move, each to the member that ranked second.
// No partition moves between two members that stay (Thaler & Ravishankar,
// "Using name-based mappings to increase hit rates", IEEE/ACM
// Transactions on Networking 6(1), 1998).
//
// The result has length n; an entry is "" when members is empty.
func Assign(members []string, n int) []string {
	out := make([]string, n)
	for p := range out {
		var best string
		var bestW uint64
		for _, m := range members {
			w := weight(m, p)
			if best == "" || w > bestW || (w == bestW && m < best) {
				best, bestW = m, w
			}
		}
		out[p] = best
	}
	return out
}

func weight(member string, p int) uint64 {
	h := fnv.New64a()
	_, _ = h.Write([]byte(member))
	var b [5]byte
	binary.BigEndian.PutUint32(b[1:], uint32(p))
	_, _ = h.Write(b[:])
	return mix64(h.Sum64())
}

func mix64(z uint64) uint64 {
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

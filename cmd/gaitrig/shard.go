package main

import (
	"strconv"
	"strings"
)

// shard is one slice of a scenario list: the K-th of N (1-based), for CI
// matrices that split the library across machines.
type shard struct{ K, N int }

// parseShard reads a --shard value "K/N".
func parseShard(s string) (shard, error) {
	if s == "" {
		return shard{1, 1}, nil
	}
	ks, ns, ok := strings.Cut(s, "/")
	k, err1 := strconv.Atoi(ks)
	n, err2 := strconv.Atoi(ns)
	if !ok || err1 != nil || err2 != nil || n < 1 || k < 1 || k > n {
		return shard{}, badUsage("--shard %q: want K/N with 1 ≤ K ≤ N, e.g. 2/4", s)
	}
	return shard{k, n}, nil
}

// pick reports whether item i (0-based, in a stable order) belongs to this shard.
func (s shard) pick(i int) bool { return i%s.N == s.K-1 }

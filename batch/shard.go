package batch

import (
	"strconv"
	"strings"

	"gaitrig/rig"
)

// Shard is one slice of a scenario list: the K-th of N (1-based), for CI
// matrices that split a library across machines. Scenario i (0-based, in
// the list's stable order) belongs to shard i mod N + 1, so every scenario
// is in exactly one shard. The zero value is not valid; use ParseShard or
// AllShards.
type Shard struct {
	K int // this shard's number, 1 to N
	N int // how many shards the list is split into, at least 1
}

// AllShards is the one shard that holds every scenario.
var AllShards = Shard{1, 1}

// ParseShard reads a --shard value "K/N"; "" means AllShards. A bad value
// wraps rig.ErrConfig.
func ParseShard(s string) (Shard, error) {
	if s == "" {
		return AllShards, nil
	}
	ks, ns, ok := strings.Cut(s, "/")
	k, err1 := strconv.Atoi(ks)
	n, err2 := strconv.Atoi(ns)
	if !ok || err1 != nil || err2 != nil || n < 1 || k < 1 || k > n {
		return Shard{}, rig.Configf("--shard %q: want K/N with 1 ≤ K ≤ N, e.g. 2/4", s)
	}
	return Shard{k, n}, nil
}

// Has reports whether item i (0-based, in a stable order) belongs to this
// shard.
func (s Shard) Has(i int) bool { return i%s.N == s.K-1 }

// Pick returns the items of list that belong to this shard, in order.
func Pick[T any](s Shard, list []T) []T {
	var out []T
	for i, x := range list {
		if s.Has(i) {
			out = append(out, x)
		}
	}
	return out
}

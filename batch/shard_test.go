package batch

import (
	"errors"
	"strconv"
	"testing"

	"gaitrig/rig"
)

func TestEveryScenarioInExactlyOneShard(t *testing.T) {
	for n := 1; n <= 5; n++ {
		for size := 0; size <= 12; size++ {
			list := make([]int, size)
			for i := range list {
				list[i] = i
			}
			seen := make([]int, size)
			for k := 1; k <= n; k++ {
				sh, err := ParseShard(strconv.Itoa(k) + "/" + strconv.Itoa(n))
				if err != nil {
					t.Fatal(err)
				}
				picked := Pick(sh, list)
				for j, i := range picked {
					seen[i]++
					if j > 0 && picked[j-1] >= i {
						t.Errorf("shard %d/%d of %d: order lost: %v", k, n, size, picked)
					}
				}
				// Shards differ in size by at most one.
				if lo, hi := size/n, (size+n-1)/n; len(picked) < lo || len(picked) > hi {
					t.Errorf("shard %d/%d of %d holds %d, want %d…%d", k, n, size, len(picked), lo, hi)
				}
			}
			for i, c := range seen {
				if c != 1 {
					t.Errorf("N=%d, %d scenarios: scenario %d is in %d shards", n, size, i, c)
				}
			}
		}
	}
}

func TestParseShard(t *testing.T) {
	if sh, err := ParseShard(""); err != nil || sh != AllShards {
		t.Errorf(`ParseShard("") = %v, %v; want 1/1`, sh, err)
	}
	if sh, err := ParseShard("2/4"); err != nil || sh != (Shard{2, 4}) {
		t.Errorf(`ParseShard("2/4") = %v, %v`, sh, err)
	}
	for _, bad := range []string{"0/3", "4/3", "1/0", "x/2", "1", "1/2/3", "-1/2", "1/-2", " 1/2"} {
		if _, err := ParseShard(bad); !errors.Is(err, rig.ErrConfig) {
			t.Errorf("ParseShard(%q) = %v, want a configuration error", bad, err)
		}
	}
}

package batch

import (
	"strconv"

	"gaitrig/rig"
)

// Environment variables a shard is read from when --shard is not given.
const (
	// IndexedJobEnv is set by a Kubernetes Indexed Job on each of its
	// pods: the pod's completion index, 0-based.
	IndexedJobEnv = "JOB_COMPLETION_INDEX"
	// ShardCountEnv gives the number of shards when it comes from the
	// environment (a Kubernetes Indexed Job does not say its completions
	// count to the pod).
	ShardCountEnv = "GAITRIG_SHARD_COUNT"
)

// ShardFrom decides the shard of a batch command: the --shard value flag
// when given; otherwise, when the environment (getenv) has
// JOB_COMPLETION_INDEX, shard index+1 of count (the --shard-count flag,
// 0 when not given, then GAITRIG_SHARD_COUNT); otherwise AllShards. Both
// at once, an index without a count, or an index outside the count wrap
// rig.ErrConfig.
func ShardFrom(flag string, count int, getenv func(string) string) (Shard, error) {
	idx := getenv(IndexedJobEnv)
	if flag != "" {
		if count != 0 {
			return Shard{}, rig.Configf("--shard %s and --shard-count %d: give one (--shard-count goes with %s)", flag, count, IndexedJobEnv)
		}
		return ParseShard(flag)
	}
	if idx == "" {
		if count != 0 {
			return Shard{}, rig.Configf("--shard-count %d without %s in the environment: give --shard K/N instead", count, IndexedJobEnv)
		}
		return AllShards, nil
	}
	i, err := strconv.Atoi(idx)
	if err != nil || i < 0 {
		return Shard{}, rig.Configf("%s=%q: want a completion index 0, 1, 2, …", IndexedJobEnv, idx)
	}
	if count == 0 {
		cs := getenv(ShardCountEnv)
		if cs == "" {
			return Shard{}, rig.Configf("%s=%d but no shard count: give --shard-count N or set %s (the Job's completions)", IndexedJobEnv, i, ShardCountEnv)
		}
		if count, err = strconv.Atoi(cs); err != nil || count < 1 {
			return Shard{}, rig.Configf("%s=%q: want a count of shards ≥ 1", ShardCountEnv, cs)
		}
	}
	if count < 1 {
		return Shard{}, rig.Configf("--shard-count %d: want a count of shards ≥ 1", count)
	}
	if i >= count {
		return Shard{}, rig.Configf("%s=%d is outside %d shards (indexes 0 to %d)", IndexedJobEnv, i, count, count-1)
	}
	return Shard{i + 1, count}, nil
}

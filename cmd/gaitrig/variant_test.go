package main

import (
	"gaitrig/batch"
	"gaitrig/scenarios"
)

// variantOf derives a scenario for this package's tests (the MQTT
// end-to-end test writes one to a file and runs it). Variants live in
// batch (batch.Derive, tested there); this wrapper can go when its callers
// call batch.Derive themselves.
func variantOf(base *scenarios.Scenario, name string, mutate func(*scenarios.Scenario)) (*scenarios.Scenario, error) {
	return batch.Derive(base, name, "test variant "+name, mutate)
}

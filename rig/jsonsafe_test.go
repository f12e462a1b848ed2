package rig

import (
	"bytes"
	"encoding/json"
	"math"
	"testing"
)

type jsonSample struct {
	Name    string             `json:"name"`
	Value   float64            `json:"value"`
	Missing float64            `json:"missing,omitempty"`
	Ptr     *float64           `json:"ptr"`
	List    []float64          `json:"list"`
	Empty   []int              `json:"empty"`
	ByName  map[string]float64 `json:"by_name"`
	Inner   struct{ X, Y float64 }
	Skipped float64 `json:"-"`
	hidden  float64
}

// For finite values JSONSafe must encode exactly as encoding/json does (the
// independent computation here); non-finite values become null.
func TestJSONSafeAgreesWithEncodingJSON(t *testing.T) {
	one := 1.5
	v := jsonSample{Name: "a", Value: 2.25, Missing: 3, Ptr: &one, List: []float64{1, 2}, Empty: []int{},
		ByName: map[string]float64{"b": 1, "a": 2}, Skipped: 9, hidden: 4}
	v.Inner.X, v.Inner.Y = 0.1, -7
	want, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	got, err := json.Marshal(JSONSafe(v))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("finite values:\n got %s\nwant %s", got, want)
	}
	v.Missing = 0 // omitempty: left out by both
	want, _ = json.Marshal(v)
	if got, _ = json.Marshal(JSONSafe(v)); !bytes.Equal(got, want) {
		t.Errorf("omitempty:\n got %s\nwant %s", got, want)
	}

	nan, inf := math.NaN(), math.Inf(1)
	v.Value, v.Ptr, v.List, v.ByName, v.Inner.Y = nan, &inf, []float64{1, math.Inf(-1)}, map[string]float64{"x": nan}, nan
	if _, err := json.Marshal(v); err == nil {
		t.Fatal("encoding/json accepted NaN; the test would prove nothing")
	}
	got, err = json.Marshal(JSONSafe(v))
	if err != nil {
		t.Fatal(err)
	}
	var back map[string]any
	if err := json.Unmarshal(got, &back); err != nil {
		t.Fatal(err)
	}
	inner := back["Inner"].(map[string]any)
	if back["value"] != nil || back["ptr"] != nil || back["list"].([]any)[1] != nil || back["by_name"].(map[string]any)["x"] != nil || inner["Y"] != nil {
		t.Errorf("non-finite values not null: %s", got)
	}
	if back["list"].([]any)[0] != 1.0 || inner["X"] != 0.1 {
		t.Errorf("finite values changed: %s", got)
	}
}

func TestJSONSafeNilSliceIsEmpty(t *testing.T) {
	got, err := json.Marshal(JSONSafe(struct {
		L []float64 `json:"l"`
	}{}))
	if err != nil || string(got) != `{"l":[]}` {
		t.Errorf("%s, %v", got, err)
	}
}

package measure

import (
	"reflect"
	"testing"
)

// Members that come off within TogetherRows of the first one and share one
// end point name that joint (common practice: a glued joint letting go frees
// every member glued at it; the members and rows are hand-made).
func TestCameOffTogether(t *testing.T) {
	res := &Result{Members: []Member{
		{ID: "AB-d2", Kind: "brace", Points: []string{"A1", "AB-d2-mid", "B2"}},
		{ID: "BC-h2", Kind: "brace", Points: []string{"B2", "BC-h2-mid", "C2"}},
		{ID: "BC-d3", Kind: "brace", Points: []string{"B2", "BC-d3-mid", "C3"}},
		{ID: "CD-h1", Kind: "brace", Points: []string{"C1", "CD-h1-mid", "D1"}},
		{ID: "block", Kind: "block", Points: []string{"block-a", "B2"}},
	}}
	first := &memberFind{m: &res.Members[0], brk: 380}
	brk := func(member string, row int) Event { return Event{Kind: EventBreak, Member: member, Row: row} }
	for _, tc := range []struct {
		name   string
		events []Event
		others []string
		joint  string
	}{
		{"two more at B2", []Event{brk("AB-d2", 380), brk("BC-h2", 380), brk("BC-d3", 382)}, []string{"BC-h2", "BC-d3"}, "B2"},
		{"one too late", []Event{brk("AB-d2", 380), brk("BC-h2", 381), brk("BC-d3", 383)}, []string{"BC-h2"}, "B2"},
		{"no shared joint", []Event{brk("AB-d2", 380), brk("CD-h1", 380)}, nil, ""},
		{"alone", []Event{brk("AB-d2", 380)}, nil, ""},
		{"the loading block is no member", []Event{brk("AB-d2", 380), brk("block", 380)}, nil, ""},
		{"onsets do not count", []Event{brk("AB-d2", 380), {Kind: EventOnset, Member: "BC-h2", Row: 380}}, nil, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			others, joint := cameOffTogether(&Diagnosis{Events: tc.events}, first, res)
			if !reflect.DeepEqual(others, tc.others) || joint != tc.joint {
				t.Errorf("got %v at %q, want %v at %q", others, joint, tc.others, tc.joint)
			}
		})
	}
}

package main

import "testing"

// A campaign of several plans names each part and lot once, in order.
func TestAppendDistinct(t *testing.T) {
	for _, tt := range []struct{ list, item, want string }{
		{"", "HX-4107", "HX-4107"},
		{"HX-4107", "HB-220", "HX-4107, HB-220"},
		{"HX-4107, HB-220", "HX-4107", "HX-4107, HB-220"},
		{"HX-4107", "", "HX-4107"},
		{"HX-41", "HX-4107", "HX-41, HX-4107"}, // a prefix is another part
	} {
		if got := appendDistinct(tt.list, tt.item); got != tt.want {
			t.Errorf("appendDistinct(%q, %q) = %q, want %q", tt.list, tt.item, got, tt.want)
		}
	}
}

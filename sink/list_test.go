package sink

import (
	"encoding/json"
	"fmt"
	"net/http"
	"net/http/httptest"
	"slices"
	"testing"
)

// TestModelListPages: GET /v1/models filters by prefix and pages with
// after and limit over a store of template instances and plain models.
// Source: this product's own API (README "HTTP"); no external reference.
func TestModelListPages(t *testing.T) {
	s := NewStore()
	var want []string
	for i := range 25 {
		name := fmt.Sprintf("trip.p%02d", i)
		want = append(want, name)
		if err := s.SetModel(testDoc(t, name, "logistic", 1)); err != nil {
			t.Fatal(err)
		}
	}
	for _, n := range []string{"flow", "trips"} {
		if err := s.SetModel(testDoc(t, n, "squared", 1)); err != nil {
			t.Fatal(err)
		}
	}
	s.Register("trip.pending") // no version: never listed
	h := NewHandler(HandlerOptions{Store: s, MaxBodyBytes: 1024})
	get := func(q string) (names []string, next string, status int) {
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, httptest.NewRequest(http.MethodGet, "/v1/models"+q, nil))
		var r struct {
			Models []modelSummary
			Next   string
		}
		if rec.Code == http.StatusOK {
			if err := json.Unmarshal(rec.Body.Bytes(), &r); err != nil {
				t.Fatal(err)
			}
		}
		for _, m := range r.Models {
			names = append(names, m.Name)
		}
		return names, r.Next, rec.Code
	}
	// Paging through the instances, 10 at a time, gives each once, in order.
	var got []string
	after, pages := "", 0
	for {
		names, next, status := get("?prefix=trip.&limit=10&after=" + after)
		if status != http.StatusOK {
			t.Fatalf("status %d", status)
		}
		got = append(got, names...)
		pages++
		if next == "" {
			break
		}
		if next != names[len(names)-1] {
			t.Fatalf("next %q, last row %q", next, names[len(names)-1])
		}
		after = next
	}
	if !slices.Equal(got, want) || pages != 3 {
		t.Errorf("paged %d pages: %v, want %v", pages, got, want)
	}
	for _, tc := range []struct {
		q      string
		n      int
		status int
	}{
		{"", 27, 200},
		{"?prefix=trip", 26, 200}, // "trips" too
		{"?prefix=nothing", 0, 200},
		{"?after=trip.p24", 1, 200},
		{"?limit=0", 0, 400},
		{"?limit=x", 0, 400},
		{fmt.Sprintf("?limit=%d", MaxListLimit+1), 0, 400},
	} {
		names, _, status := get(tc.q)
		if status != tc.status || len(names) != tc.n {
			t.Errorf("%q: status %d, %d models; want %d, %d", tc.q, status, len(names), tc.status, tc.n)
		}
	}
}

func TestValidName(t *testing.T) {
	for _, c := range []struct {
		name string
		want bool
	}{
		{"pump", true},
		{"trip.p07", true},
		{"a.b.c", true},
		{"", false},
		{".trip", false},
		{"trip.", false},
		{"trip..p07", false},
		{"trip.*", false},
		{"trip.>", false},
		{"trip p", false},
	} {
		if got := validName(c.name); got != c.want {
			t.Errorf("validName(%q) = %v, want %v", c.name, got, c.want)
		}
	}
}

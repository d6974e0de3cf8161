package main

import (
	"bytes"
	"encoding/json"
	"math"
	"strings"
	"testing"
)

func TestLawJSON(t *testing.T) {
	var out, errb bytes.Buffer
	code := runMain([]string{"law", "--dim", "3", "--horizon", "5", "--radius", "6,8", "--quantiles", "0.5", "--tolerance", "1e-4", "--json"}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d, stderr %q", code, errb.String())
	}
	var rep struct {
		Dim       *int     `json:"dim"`
		Horizon   *float64 `json:"horizon"`
		Centring  *float64 `json:"centring"`
		CDF       []struct{ Radius, P, Err *float64 }
		Quantiles []struct{ Q, Radius, Err *float64 }
	}
	dec := json.NewDecoder(&out)
	if err := dec.Decode(&rep); err != nil {
		t.Fatalf("output is not JSON: %v", err)
	}
	if rep.Dim == nil || *rep.Dim != 3 || rep.Horizon == nil || *rep.Horizon != 5 || rep.Centring == nil {
		t.Fatalf("missing or wrong dim/horizon/centring: %+v", rep)
	}
	// Centring m_5(3) = sqrt2*5 - log(5)/(2 sqrt2) (SPEC §2; derived).
	if want := math.Sqrt2*5 - math.Log(5)/(2*math.Sqrt2); math.Abs(*rep.Centring-want) > 1e-12 {
		t.Errorf("centring %v, want %v", *rep.Centring, want)
	}
	if len(rep.CDF) != 2 || len(rep.Quantiles) != 1 {
		t.Fatalf("want 2 cdf points and 1 quantile, got %d and %d", len(rep.CDF), len(rep.Quantiles))
	}
	for _, c := range rep.CDF {
		if c.Radius == nil || c.P == nil || c.Err == nil || *c.P < 0 || *c.P > 1 || !(*c.Err > 0) || *c.Err > 1e-4 {
			t.Errorf("bad cdf entry %+v", c)
		}
	}
	if !(*rep.CDF[0].P < *rep.CDF[1].P) {
		t.Errorf("CDF not increasing: %v then %v", *rep.CDF[0].P, *rep.CDF[1].P)
	}
	q := rep.Quantiles[0]
	if q.Q == nil || *q.Q != 0.5 || q.Radius == nil || q.Err == nil || !(*q.Radius > 6 && *q.Radius < 8) {
		t.Errorf("bad quantile entry q=%v radius=%v", q.Q, q.Radius)
	}
}

func TestLawDefaultQuantilesAndText(t *testing.T) {
	var out, errb bytes.Buffer
	if code := runMain([]string{"law", "--dim", "1", "--one-sided", "--horizon", "3", "--tolerance", "1e-4"}, &out, &errb); code != 0 {
		t.Fatalf("exit %d, stderr %q", code, errb.String())
	}
	s := out.String()
	for _, want := range []string{"0.1", "0.5", "0.9", "± err", "centring", "deterministic"} {
		if !strings.Contains(s, want) {
			t.Errorf("text output lacks %q:\n%s", want, s)
		}
	}
}

func TestLawHelp(t *testing.T) {
	var out, errb bytes.Buffer
	if code := runMain([]string{"law", "--help"}, &out, &errb); code != 0 {
		t.Fatalf("--help exit %d", code)
	}
	if s := errb.String() + out.String(); !strings.Contains(s, "deterministic") || !strings.Contains(s, "error estimate") {
		t.Errorf("help does not explain the numbers:\n%s", s)
	}
}

func TestLawBadInput(t *testing.T) {
	cases := []struct {
		args []string
		word string // the bad value must be named
	}{
		{[]string{"--dim", "0", "--horizon", "1"}, "0"},
		{[]string{"--horizon", "0"}, "horizon"},
		{[]string{"--horizon", "-2"}, "-2"},
		{[]string{"--dim", "2"}, "horizon"},
		{[]string{"--horizon", "1", "--children", "1"}, "children"},
		{[]string{"--horizon", "1", "--sigma", "0"}, "sigma"},
		{[]string{"--horizon", "1", "--sigma", "-1"}, "-1"},
		{[]string{"--horizon", "1", "--beta", "0"}, "beta"},
		{[]string{"--horizon", "1", "--radius", "-1"}, "-1"},
		{[]string{"--horizon", "1", "--radius", "abc"}, "abc"},
		{[]string{"--horizon", "1", "--quantiles", "0"}, "0"},
		{[]string{"--horizon", "1", "--quantiles", "0.5,1.2"}, "1.2"},
		{[]string{"--horizon", "1", "--tolerance", "0"}, "tolerance"},
		{[]string{"--horizon", "1", "--tolerance", "-1e-3"}, "-0.001"},
		{[]string{"--horizon", "1", "--threads", "-1"}, "threads"},
		{[]string{"--horizon", "1", "--dim", "2", "--one-sided"}, "one-sided"},
		{[]string{"--horizon", "1", "--frobnicate"}, "frobnicate"},
		{[]string{"--horizon", "1", "extra"}, "extra"},
	}
	for _, c := range cases {
		var out, errb bytes.Buffer
		code := runMain(append([]string{"law"}, c.args...), &out, &errb)
		msg := errb.String()
		if code != 2 {
			t.Errorf("%v: exit %d, want 2 (stderr %q)", c.args, code, msg)
			continue
		}
		if strings.Count(strings.TrimSpace(msg), "\n") != 0 || !strings.Contains(msg, c.word) {
			t.Errorf("%v: want one line naming %q, got %q", c.args, c.word, msg)
		}
	}
}

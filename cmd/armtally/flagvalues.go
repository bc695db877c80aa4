package main

import (
	"fmt"
	"strconv"
	"strings"
)

// parseBytes parses a size in bytes: a positive number with an optional
// unit, B, kB, MB, GB, TB (powers of 1000) or KiB, MiB, GiB, TiB (powers of
// 1024); K, M, G and T alone are taken as the powers of 1024, as most
// memory settings take them. "1.5GB" is 1,500,000,000 bytes.
func parseBytes(s string) (int64, error) {
	t := strings.TrimSpace(s)
	i := 0
	for i < len(t) && (t[i] >= '0' && t[i] <= '9' || t[i] == '.') {
		i++
	}
	num, unit := t[:i], strings.TrimSpace(t[i:])
	v, err := strconv.ParseFloat(num, 64)
	if err != nil || num == "" {
		return 0, fmt.Errorf("%q: want a size such as 800MB or 2GiB", s)
	}
	mult := map[string]float64{
		"": 1, "B": 1,
		"kB": 1e3, "KB": 1e3, "MB": 1e6, "GB": 1e9, "TB": 1e12,
		"KiB": 1 << 10, "MiB": 1 << 20, "GiB": 1 << 30, "TiB": 1 << 40,
		"K": 1 << 10, "M": 1 << 20, "G": 1 << 30, "T": 1 << 40,
	}[unit]
	if mult == 0 {
		return 0, fmt.Errorf("%q: unknown unit %q (want B, kB, MB, GB, TB, KiB, MiB, GiB or TiB)", s, unit)
	}
	b := v * mult
	if !(b >= 1) || b > 1<<62 {
		return 0, fmt.Errorf("%q: want a size from 1 byte to 4 EiB", s)
	}
	return int64(b), nil
}

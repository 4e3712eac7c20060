package main

import (
	"bufio"
	"fmt"
	"os"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"
)

var flagMaxMemory = &cli.StringFlag{
	Name:     "max-memory",
	Category: "Filter",
	Usage: "largest `SIZE` of the filter's working buffers, e.g. 4GiB or 800MiB; a run that would need more " +
		"stops before allocating (default: three quarters of this machine's memory)",
}

// maxBufferBytes returns the limit on the engine's buffers: --max-memory, or three
// quarters of the machine's memory, or 0 (no limit) when neither is known.
func maxBufferBytes(c *cli.Context) (int64, error) {
	if s := c.String(flagMaxMemory.Name); s != "" {
		n, err := parseByteSize(s)
		if err != nil {
			return 0, usageErrorf("--max-memory: %v", err)
		}
		return n, nil
	}
	return physicalMemory() / 4 * 3, nil
}

// parseByteSize reads "4GiB", "800MiB", "2G", "1.5GB" or a plain number of bytes. K, M,
// G and T count powers of 1024, as memory sizes usually do (common practice).
func parseByteSize(s string) (int64, error) {
	t := strings.TrimSpace(strings.ToLower(s))
	mult := int64(1)
	for _, u := range []struct {
		suffix string
		m      int64
	}{{"tib", 1 << 40}, {"gib", 1 << 30}, {"mib", 1 << 20}, {"kib", 1 << 10},
		{"tb", 1 << 40}, {"gb", 1 << 30}, {"mb", 1 << 20}, {"kb", 1 << 10},
		{"t", 1 << 40}, {"g", 1 << 30}, {"m", 1 << 20}, {"k", 1 << 10}, {"b", 1}} {
		if strings.HasSuffix(t, u.suffix) {
			t, mult = strings.TrimSpace(strings.TrimSuffix(t, u.suffix)), u.m
			break
		}
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || v <= 0 || v*float64(mult) > 1<<62 {
		return 0, fmt.Errorf("%q is not a size (want e.g. 4GiB or 800MiB)", s)
	}
	return int64(v * float64(mult)), nil
}

// physicalMemory reads MemTotal from /proc/meminfo; 0 when it cannot.
func physicalMemory() int64 {
	f, err := os.Open("/proc/meminfo")
	if err != nil {
		return 0
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		fields := strings.Fields(sc.Text())
		if len(fields) >= 2 && fields[0] == "MemTotal:" {
			kb, err := strconv.ParseInt(fields[1], 10, 64)
			if err == nil {
				return kb << 10
			}
		}
	}
	return 0
}

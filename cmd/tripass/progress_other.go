//go:build !unix

package main

// peakRSS is unknown on systems without getrusage; the summary then leaves it out.
func peakRSS() uint64 { return 0 }

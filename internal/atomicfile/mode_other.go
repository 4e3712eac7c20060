//go:build !unix

package atomicfile

func processUmask() uint32 { return 0o022 }

package main

import (
	"fmt"
	"strings"

	"github.com/tripass/tripass/io/nifti"
	"github.com/tripass/tripass/io/rawstack"
	"github.com/tripass/tripass/io/tiffstack"
	"github.com/tripass/tripass/volume"
)

// storageDetails describes how an open stack is stored: compression, layout and page
// or file count, for `tripass info`.
func storageDetails(src volume.Source) (compression, layout string, pages int) {
	switch r := src.(type) {
	case *tiffstack.Reader:
		return tiffCompression(r.Info()), tiffLayout(r.Info()), r.Info().Pages
	case *tiffstack.FolderReader:
		in := r.Info()
		return tiffCompression(in), fmt.Sprintf("%d single-page files, %s", in.Files, tiffLayout(in)), in.Pages
	case *nifti.Reader:
		c := "none"
		if r.Compressed() {
			c = "gzip"
		}
		l := fmt.Sprintf("NIfTI-1, %s, datatype %v", orderName(r.ByteOrder().String()), r.Datatype())
		if slope, inter, applied := r.Scaling(); applied {
			l += fmt.Sprintf(", scaled on read (slope %g, intercept %g)", slope, inter)
		}
		return c, l, 0
	case *rawstack.Reader:
		return "none", "headerless samples, x fastest, then y, then z", 0
	}
	return "", "", 0
}

func tiffCompression(in tiffstack.Info) string {
	c := strings.Join(in.Compression, "+")
	if len(in.Predictor) > 0 && !(len(in.Predictor) == 1 && in.Predictor[0] == "none") {
		c += ", predictor " + strings.Join(in.Predictor, "+")
	}
	return c
}

func tiffLayout(in tiffstack.Info) string {
	l := fmt.Sprintf("%s, %s, %s", in.Format(), in.Order(), in.Layout())
	if in.Skipped > 0 {
		l += fmt.Sprintf(" (%d reduced-resolution pages skipped)", in.Skipped)
	}
	return l
}

func orderName(s string) string {
	if strings.Contains(strings.ToLower(s), "big") {
		return "big-endian"
	}
	return "little-endian"
}

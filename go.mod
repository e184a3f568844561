module tracelift

go 1.26.0

require (
	fyne.io/fyne/v2 v2.7.1 // indirect
	github.com/disintegration/imaging v1.6.2 // indirect
	github.com/go-pdf/fpdf v0.9.0 // indirect
	github.com/mitchellh/colorstring v0.0.0-20190213212951-d06e56a500db // indirect
	github.com/rivo/uniseg v0.4.7 // indirect
	github.com/schollz/progressbar/v3 v3.19.1 // indirect
	gocv.io/x/gocv v0.31.0 // indirect
	golang.org/x/image v0.48.0 // indirect
	golang.org/x/sys v0.50.0 // indirect
	golang.org/x/term v0.44.0 // indirect
	gonum.org/v1/gonum v0.17.0 // indirect
)

module fovea

go 1.26.8

require (
	github.com/yalue/onnxruntime_go v1.27.0
	google.golang.org/protobuf v1.36.12
)

require (
	fyne.io/fyne/v2 v2.7.1 // indirect
	github.com/disintegration/imaging v1.6.2 // indirect
	golang.org/x/image v0.48.0 // indirect
)
